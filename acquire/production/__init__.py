"""Production testing: test plans, judgement with guard bands, bins, and the station loop.

Modules: ``plan`` (the plan's objects), ``plan_file`` (reading and checking a plan file),
``judgement`` (decision rules, guard bands, bins), ``measure`` (measuring one unit), ``outbox``
(units kept locally while the store is away), ``station`` (the loop) and ``screen`` (what the
operator sees).
"""
