"""The project document: the saved file, walkthroughs, view settings, data sets, safe writing."""
