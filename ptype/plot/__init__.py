"""Figures: the thermodynamic diagram of one profile (:mod:`.diagram`) and the map of a
diagnosed grid (:mod:`.gridmap`).  matplotlib is imported inside the drawing functions, so
importing this package costs nothing until a figure is drawn."""
