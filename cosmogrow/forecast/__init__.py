"""Forecasts of planned observations (docs/method.md#forecast): the expected Fisher matrix of the
fit's own likelihood (selection included) for a plan of samples, the predicted width of k and the
power to exclude k = 0 and k = 3, scans against sample sizes, depth and offset-prior width, the
sample that breaks a k-offset degeneracy, and a check of the prediction by mocks fitted with the
fast estimator. `plan` reads a plan, `fisher` computes the matrix, `scans` varies the plan and
`run` ties them together; nothing here prints, draws or writes files.
"""
