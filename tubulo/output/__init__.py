"""Renderers: the last layer, turning results into text and JSON."""
