"""Checks of a measurement: the null tests (would the method find k where there is none, do the
subsets agree), their shared fitting context and statistics, and the challenge of a claimed k
under the data's own selection (docs/method.md#null-tests).
"""
