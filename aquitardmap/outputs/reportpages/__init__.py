"""The pages of the printable report (:mod:`aquitardmap.outputs.report`), one module a
kind of page: ``frame`` (A4 pages with header, caution footer and the text flow), ``title``
(the job, data, thresholds, results), ``maps``, ``statistics`` (variogram, cross-validation
and calibration) and ``tables`` (flagged areas, parameters and methods)."""
