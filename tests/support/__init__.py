"""Shared test support: sample zones, hypothesis strategies, server fixtures."""
