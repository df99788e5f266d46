"""Parent side of running scripts: the child's environment and limits, the warm pool, repo copies, the result cache.

Nothing here imports matplotlib; the scripts run in :mod:`figproof.child.main`.
"""
