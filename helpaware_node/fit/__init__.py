# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

"""Fitting of the site constants from logged outcomes, offline and online (DESIGN.md 8, 8b).

Pure numpy/scipy; no ROS.  Modules: data (outcome tables and the CSV reader), site_likelihood
(marginal likelihood by Gauss-Jacobi quadrature), site_fit (optimiser, standard errors,
likelihood-ratio test), convergence (the verdict: did a fit reach its maximum?), glmm
(random-intercept logistic model by adaptive Gauss-Hermite), heldout (k-fold log loss and
calibration), paramfile (the node's YAML parameter file), online (site learning: the same fit
while the node runs, shrunk towards the parameter file by pseudo_outcomes), refit_worker (the
process a node runs refits in).
"""
