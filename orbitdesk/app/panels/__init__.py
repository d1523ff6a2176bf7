"""Qt panels beside the views: model editor, read-back, parameters, walkthrough, data import."""
