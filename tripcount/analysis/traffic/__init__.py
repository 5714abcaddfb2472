# Analysis (package): traffic per cache level -- the lines (and bytes) each
# cache level brings in over one nest under a stated cache model, derived
# from the exact per-level working sets of the footprint analysis and the
# reuse each loop level carries (the layer condition).
#
# Modules: results (result objects, JSON, text, assumptions), model (the
# layer-condition recursion and its pair counts), run (entry).

from tripcount.analysis.traffic.results import LevelTraffic, NestTraffic, TrafficCount
from tripcount.analysis.traffic.run import analyze

__all__ = ["LevelTraffic", "NestTraffic", "TrafficCount", "analyze"]
