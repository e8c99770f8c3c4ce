"""Beyond one trial: a development program (phase 2 then phase 3), an interim look, and a
portfolio of trials with the size worth paying for.

The computations here use the single-trial engine below them (endpoints, priors, rules,
:func:`assurance.evaluate`); the Plan-like objects that read files and write memos live one
layer up (``assurance.program_plan``, ``assurance.interim_plan``, ``assurance.portfolio_plan``).
"""
