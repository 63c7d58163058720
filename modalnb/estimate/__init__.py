"""Estimation engine (headless)."""
