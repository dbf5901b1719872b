"""Plain Rich renderables with no widget state: trends, the braille canvas and the regime map."""
