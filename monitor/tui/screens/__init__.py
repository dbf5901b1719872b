"""One Textual screen per module: the console, the journal, help and the small dialogs."""
