"""Tests of the knowledge package (tubulo.kb)."""
