"""Tests of the synthetic demo."""
