"""Analyses built on re-solves of the engine: what capacity is worth (capacity/), risk (risk/)."""
