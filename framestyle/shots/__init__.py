"""Shots: where the temporal chain restarts — detected cuts and transitions, or the user's list."""

from framestyle.shots.shot import Shot, shots_from_boundaries

__all__ = ["Shot", "shots_from_boundaries"]
