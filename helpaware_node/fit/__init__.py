"""Fitting of the site constants from logged outcomes, offline and online (DESIGN.md 8, 8b).

Pure numpy/scipy; no ROS.  Modules: data (outcome tables and the CSV reader), site_likelihood
(marginal likelihood by Gauss-Jacobi quadrature), site_fit (optimiser, standard errors,
likelihood-ratio test), convergence (the verdict: did a fit reach its maximum?), glmm
(random-intercept logistic model by adaptive Gauss-Hermite), heldout (k-fold log loss and
calibration), paramfile (the node's YAML parameter file), online (site learning: the same fit
while the node runs, shrunk towards the parameter file by pseudo_outcomes), refit_worker (the
process a node runs refits in).
"""
