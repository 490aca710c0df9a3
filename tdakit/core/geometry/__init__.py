"""Geometry: clouds and their metrics, distances and neighbours, density, landmark selection."""

from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.density import densest_points, knn_density, knn_radius
from tdakit.core.geometry.landmarks import Landmarks, landmarks_from_indices, select_landmarks
from tdakit.core.geometry.metrics import METRICS, Metric

__all__ = ["Cloud", "Landmarks", "METRICS", "Metric", "densest_points", "knn_density", "knn_radius",
           "landmarks_from_indices", "select_landmarks"]
