"""Exploring a design space: the grid (:mod:`.grid`), finished tasks kept by content
(:mod:`.cache`), where tasks run (:mod:`.runners`: a local process pool or a Dask cluster),
the front and the recommended point (:mod:`.front`) and the files showing them
(:mod:`.page`). What one task does is the app's (:mod:`thresh2hdl.app.explore_point`)."""

from .cache import TaskCache, content_key
from .front import OBJECTIVES, dominates, pareto_front, point_label, recommend
from .grid import AXES, DEFAULT_GRID, Constraints, Grid
from .page import CSV_COLUMNS, front_csv, front_html, front_json
from .runners import DaskRunner, LocalRunner, make_runner

__all__ = ["TaskCache", "content_key", "OBJECTIVES", "dominates", "pareto_front",
           "point_label", "recommend", "AXES", "DEFAULT_GRID", "Constraints", "Grid",
           "CSV_COLUMNS", "front_csv", "front_html", "front_json", "DaskRunner", "LocalRunner",
           "make_runner"]
