"""marram: data reduction for the (fictional) Marram Point Coastal Lab.

Modules: counting (particle counter), mooring (buoys and culverts), chemistry
(sample acidity), growth (plankton cultures), budget (the lab's reserve fund),
calibration (pier strain gauges and the survey clinometer).
"""
