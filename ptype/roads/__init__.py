"""The road side: timelines from a series of forecast profiles (:mod:`.nowcast`), the road
hazards of each step (:mod:`.hazards`) and the alerts raised from them (:mod:`.alerts`)."""
