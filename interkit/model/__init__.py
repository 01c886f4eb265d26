"""What to compute: geometry, scan coordinates, levels of theory, the scan spec, jobs and
demo systems. Pure data and validation of form; no electronic-structure calculation."""
