"""Qt side: windows, docks and views over the core."""
