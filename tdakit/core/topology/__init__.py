"""Topology: filtrations on landmarks, persistence diagrams, diagram distances, landscapes."""

from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.distances import diagram_distance
from tdakit.core.topology.filtrations import compute_diagrams, stability_constant, witness_edge_values
from tdakit.core.topology.landscapes import persistence_landscape

__all__ = ["Diagrams", "compute_diagrams", "diagram_distance", "persistence_landscape", "stability_constant",
           "witness_edge_values"]
