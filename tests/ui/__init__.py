"""Tests of the terminal workbench (tubulo ui)."""
