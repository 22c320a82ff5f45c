"""Widgets drawn with text characters: the braille canvas, the polar plot and the fitting dial."""
