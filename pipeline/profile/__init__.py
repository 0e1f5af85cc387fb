"""Stations along each road and the ground elevation read there, with artefacts masked."""
