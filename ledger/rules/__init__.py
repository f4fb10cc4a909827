"""Acceptance decisions: plain values and limits in, a verdict with every reason out. Pure."""
