"""thermorph_post: reading, figures, reports and CSV export for thermorph results files (HDF5).

Pure Python (numpy, h5py, matplotlib). Modules:

- results  reader: datasets with units, segments, events, the stored case (Results)
- budget   mean heat flows over a time window (segments, blood pool, whole body)
- style    look shared by every figure: palette, presets, caution footer, saving with source data
- figures  publication figures of one run (temperatures, budget, maps, forcing) and an overlay of runs
- sweep    figures of a sweep table (lines, heat maps)
- export   CSV export (wide, one column per cell, or long "tidy" form)
- sample   a small synthetic results file (invented values) for tests

Figure functions return Matplotlib Figure objects and set no global Matplotlib state.
See postproc/README.md.
"""

__version__ = "0.2.0"

#: The caution drawn on every figure (and printed by the report): one text in one place in postproc.
CAUTION = ("Model estimates for research only; not veterinary or medical advice. Follow local regulations, "
           "animal-welfare rules and licensed veterinary or medical practice.")
