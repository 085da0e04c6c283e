"""The JSON report's format version: written by the report
(:mod:`checker.report.json_report`) and checked by its reader, the baseline
loader (:mod:`checker.review`), which sits below the reports.

A reader accepts versions 1 to :data:`REPORT_VERSION`; a change that an
older reader would misread raises it.
"""

REPORT_VERSION = 1
