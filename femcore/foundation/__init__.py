"""The foundation application: a piled (or shallow) wind-turbine foundation on layered soil.

``design`` (the validated design file) -> ``build`` (mesh and model) -> ``stages`` (initial
stresses, weights, vertical load, pushover) -> ``keypoints`` and ``requirements`` -> a
:class:`~femcore.foundation.run.Result`. This package never prints or writes files: the
workflows (``femcore.workflows``) do.
"""
