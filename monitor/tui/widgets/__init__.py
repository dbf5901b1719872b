"""One Textual widget per module; each is driven downward by its ``snapshot`` attribute."""
