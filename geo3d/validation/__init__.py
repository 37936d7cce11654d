"""Validation against synthetic truth: random sites whose volumes are known, and their scores.

* :mod:`geo3d.validation.geology` draws a random geology (layer-cake, dipping and pinching
  sheets, channels, lenses, thin laminae) that can be evaluated at any point;
* :mod:`geo3d.validation.forward` forward-models the field records (injection logs,
  dissipation tests, slug tests) of a probe pushed through that geology;
* :mod:`geo3d.validation.truth` puts both together into a complete site folder plus its true
  volumes per facies and treatment zone;
* :mod:`geo3d.validation.score` runs the whole job on such sites and scores the volumes and
  their P10-P90 bands against the truth.

Every site is invented: no real place, company or person.
"""
