"""Offline fitting of the site constants from logged outcomes (DESIGN.md section 8, `fit`).

Pure numpy/scipy; no ROS.  Modules: data (outcome tables and the CSV reader), site_likelihood
(marginal likelihood by Gauss-Jacobi quadrature), site_fit (optimiser, standard errors,
likelihood-ratio test), convergence (the verdict: did a fit reach its maximum?), glmm (random-intercept logistic model by adaptive Gauss-Hermite),
heldout (k-fold log loss and calibration), paramfile (the node's YAML parameter file).
"""
