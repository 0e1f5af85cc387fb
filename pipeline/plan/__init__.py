"""Horizontal curves of the centreline and operating speeds."""
