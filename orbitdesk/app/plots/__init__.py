"""Qt plot helpers shared by every view: style, value read-off, figures at a chosen size, data overlays."""
