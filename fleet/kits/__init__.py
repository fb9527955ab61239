"""Vessel kits: export a copy of part of the fleet, serve it on board, pack it to come back
(docs/kits.md)."""
