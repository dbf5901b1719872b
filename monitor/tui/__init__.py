"""The operator's Textual screen: screens, widgets, plain renderables and the worker that feeds them."""
