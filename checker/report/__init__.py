"""Output formats. Each renders the same :class:`checker.runner.Result`."""

CAUTION = (
    "Estimates for design review, not a field-solver sign-off: closed forms and a 2-D "
    "cross-section model give C12 and noise to within their stated ranges only. Sign-off rests "
    "with the responsible engineer, the fabricator's stackup data and the applicable standards "
    "and practice."
)
