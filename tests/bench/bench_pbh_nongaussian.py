"""Benchmark: non-Gaussian f_PBH of 64 spectra vs the Gaussian stack (issue 15, step 4).

64 log-normal peaks (width 0.5, ln k_peak uniform in [13.5, 15.5], log10 A uniform in
[-2.6, -2.0], top-hat window, C_th = 0.55) on one k table, 32 masses, 128 formation
epochs.  Gaussian: one :meth:`PBHPlan.evaluate` of the (64, n_k) stack.  Non-Gaussian:
:meth:`StackedNGPlan.evaluate` of the same stack (scan/observables/pbh/ng_stack.py) with the
local map f_NL = 1 and the logarithmic map lambda = 3.  Timed side by side in
alternating blocks (thread CPU time); the acceptance target of issue 15 is <= 3x.
``--reference`` adds the per-spectrum :meth:`NonGaussianPlan.evaluate` (minutes);
``--qcd`` the stacks with both QCD-era conventions (per-epoch thresholds and exponents,
:func:`plan_pbh_mapped`).

Measured (2-core machine shared with other jobs, nice 15; ratios min-based, the Gaussian
stack 2-4 ms; ranges over runs, the machine is noisy):

* main 3d95cf0 (array-code ridge search): local f_NL = 1 63-64x, logarithmic 5.3-5.5x.
* compiled ridge integral + closed-form live bound (ng_ridge.py): local 21-27x.
* + sharper far-branch bound (2.3k instead of 12k far-branch integrals): local 17.6-23x
  over 6 runs; logarithmic 5.7-7.5x (path unchanged).

* ``--qcd`` (qcdsample branch, 2 runs, same run as the rows above): the Gaussian stack
  with the QCD-era conventions (the threshold plan: direct 48-point beta quadrature per
  live pair instead of the table) 3.4-4.6x the tabulated Gaussian stack, the same cost
  as the threshold plan with one threshold (scan/observables/pbh/threshold_plan.py);
  local 18.0-19.2x (17.3x without), logarithmic 6.2-6.3x (5.7-6.1x without).

* main 6defc95 (third, damped ridge-search seed) against this branch (ngspeed3, final),
  side by side (a copy of this benchmark with 8 blocks, 3 runs; f_NL = -1: 6 blocks,
  2 runs): local f_NL = 1 25.6-27.2x -> 15.4-18.7x, local f_NL = -1 23.6-26.9x ->
  12.8-13.6x, logarithmic 6.1-6.7x -> 3.5-3.9x.  This file on ngspeed3, 5 runs: local
  15.2-18.4x, logarithmic 3.4-3.8x; with --qcd (2 runs): QCD-era local 15.7-17.2x,
  logarithmic 3.9-4.1x (Gaussian QCD stack 4.8-5.2x).  The steps, each measured side by
  side before/after: exponentials clipped at e^-700 onto libm's fast path (mass function
  and beta; e^-800 cost 19 ns, e^-720 260 ns, against ~1 ns): local 23.6 -> 18.8x,
  logarithmic 7.9 -> 6.4x; the logarithmic closed form compiled per pair with
  ln(e^-x^2 + sqrt(pi) x erfc(-x)) from a table (erfc ~30 ns) and beta in cache-sized
  blocks: 6.4 -> 3.6x; one product for the three variances; the one-ridge Gauss-Hermite
  sum without a log per node: local ~10 %; the local map's dead-pair cut (marginal
  bound: 2736 of 3597 pairs computed at f_NL = 1, 3228 at -1): local 17 -> 13x before
  the merge of the third seed; the cut's bound with the correlation (2542 at f_NL = 1,
  1840 at -1): f_NL = -1 22-23x -> 14-15x, f_NL = 1 about even.

* ngtable branch (the local map's density from a table in reduced variables,
  scan/observables/pbh/ng_table.py; the mass function over the live pairs only,
  ng_pairs.py; 8 bracket halvings in the cut's bound), this file alternated with main
  (bee91c3 / 9955f2a), 3 or 8 blocks, 4 runs each after the last change: local f_NL = 1
  15.2-19.7x -> 3.9-4.4x, f_NL = -1 11.7-14.6x -> 3.1-3.6x, logarithmic 3.3-3.9x ->
  3.4-3.9x (its path changed only in the mass function: even within noise); a busier
  hour gave up to 4.7x / 3.8x / 4.2x on the branch.  With --qcd (1 run each): local
  19.8x -> 4.3x, f_NL = -1 13.4x -> 3.4x, logarithmic 4.2x -> 3.7x (Gaussian QCD stack
  5.5x -> 3.2x, same code: noise).  The table is built once per process (~1 s, inside
  the first block; the ratios are min-based).  By parts (py-spy, f_NL = 1): the
  tabulated density ~47 % (~0.23 us per density: the tricubic lookup of G and of the
  ridge seed ~0.17 us, one Newton step and the Laplace value ~0.06 us; 2.5k pairs x 9
  nodes), mass function ~12 % (before the compiled products and scatter), the cut's bound
  ~9 %, variances ~7 %, beta ~4 %.  The lookup is compute-bound (a float32 table, a
  different layout, and linear interpolation in ln t -- which doubled the error and the
  Newton steps -- were measured no faster overall), so 3x for f_NL = 1 needs fewer
  densities (the cut keeps 2.5k pairs where ~2k matter) or a cheaper remainder than
  4^3 nodes.

* ngspeed5 branch (the local bound with the best split e = 2/nu^2 per pair instead of
  e = 0.1, ng_density.ln_density_bound; 5 instead of 8 bracket halvings in its near-branch
  search, ng_closed.N_HALVE), a copy of this file with 10 blocks alternated with main
  0c683ab, 3 runs each (machine loaded by other helpers' surrogate training): local f_NL =
  1 4.3-4.7x -> 4.0-4.2x, f_NL = -1 3.4-3.7x -> 3.0-3.4x, logarithmic 3.9-4.0x ->
  3.7-4.0x (path unchanged: noise).  The split alone, in one process against e = 0.1
  (40 alternating blocks): f_NL = 1 4.65x -> 4.58x, -1 3.81x -> 3.58x; the cut computes
  2393 + 58 pairs at f_NL = 1 (2473 + 70 before), 1626 + 69 at -1 (1699 + 141); f(M)
  above 1e-30 of each spectrum's largest and the totals bit-identical to main (with both
  changes); 5 halvings keep 2399 + 65 and 1628 + 73 and take ~35 % off the search
  (0.60-0.67 -> 0.40-0.41 ms).  The cut is now at its floor: with each pair's
  exact contribution (max_M weight x g(y(M)), and its term of the total) in place of the
  bound, the same e^-100 rule keeps 2372 pairs at f_NL = 1 and 1615 at -1 (the bound
  2451 / 1695); a shorter range would not pay either (exact contributions at e^-80: 2199
  pairs, at e^-60: 1972 -- 17 % fewer densities, but the dropped pairs' 5e-12 relative
  error would then hold only down to f(M) = 5e-22 and 2e-13 of the largest, not 1e-30).
  By parts now (f_NL = 1, per evaluation, Gaussian stack = 1): the tabulated density
  2.6 (2.45k pairs x 9 nodes, ~0.3 us each), beta 0.55, the bound 0.25-0.3, variances
  0.36, mass function 0.31, the rest (pair selection, indexing) ~0.4; so 3x for f_NL = 1
  needs the density itself ~2x cheaper.  Logarithmic by parts: beta 1.45 (7.1k pairs x
  120 nodes: the 9-column product 0.8 ms and the exponentials 0.75 ms of ~2.3 ms),
  closed form 1.28, mass function 1.0, variances 0.43; a cut of beta alone at e^-50 of
  the total (below rounding for the total) would skip 947 of 7144 pairs (13 %): not
  done.

* ngspeed6 branch (the tabulated density in passes the compiler vectorises -- G's tricubic
  lookup with unsigned offsets, the ridge seed trilinear from its own table, two full
  Newton steps from it with the damped search only where they miss its stopping rule,
  the pairs' elements laid out in compiled code: ng_table.py; beta without the clip where
  a Lebesgue-constant bound keeps every exponent above -700, the mass function's clip
  folded into its compiled loops: ng_pairs.py; the dead-pair check by column maxima),
  this file (tests/bench/_timing.py, 30 blocks) run against main 6e9e956 and this branch
  alternately, 5 runs each (machine loaded: load average 4.0-4.6 on the 2 cores, other
  helpers' training): local f_NL = 1 4.39-4.86x -> 2.99-3.48x, f_NL = -1 3.43-3.79x ->
  2.48-2.72x, logarithmic 3.86-4.42x -> 3.59-3.93x.  With --qcd (20 blocks, 2 runs each):
  QCD-era local f_NL = 1 4.34-4.37x -> 3.41-3.52x, f_NL = -1 3.39-3.47x -> 2.69-2.88x,
  logarithmic 4.04-4.18x -> 4.17-4.38x (the Gaussian QCD stack, the same code on both,
  3.43-3.45x and 3.63-3.85x: that is the noise); the plain rows of those runs 3.94-4.21x
  -> 2.98-3.21x, 3.14-3.32x -> 2.54-2.69x, 3.62-3.78x -> 3.68-3.92x.  Before the
  trilinear seed (both values tricubic), 5 runs: 4.01-4.77x -> 3.34-3.62x, 3.15-3.74x ->
  2.76-3.29x, 3.84-4.10x -> 3.42-3.90x.  The density alone, side by side in one process
  on the benchmark's 22k elements: 0.23 -> 0.125 us per element (0.53x; 0.65x before the
  trilinear seed; that form's parts: lookup ~0.065, the two vectorised Newton steps
  0.005 against ~0.06 for the damped search from the same seed, asinh/log and the
  Laplace value's logs ~0.03).  Results: the local maps within 2e-12 of main in f(M) and
  totals (both searches stop within their 1e-4-width rule; ln h within 1.8e-10 at 1.7e5
  random and benchmark points), logarithmic, capped and Gaussian bit-identical.  By parts
  now (a separate script timing the parts, the maps alternated, the Gaussian stack = 1;
  its totals are below this file's ratios, cause not pinned down): f_NL = 1
  density 0.79, beta 0.37, variances 0.28, bound 0.23, mass function 0.17, the rest
  ~0.35 (total 2.2); logarithmic: beta 0.91, closed form 0.6, mass function 0.5,
  variances 0.23 (total 2.6).  So 3x for the logarithmic map needs beta (120 exponentials
  per pair on 7.1k pairs) cheaper; see below.  Tried and not kept: the ridge continued
  along a pair's nodes (extrapolated seed, 3 Newton steps) with a G-only lookup and the pair's rho weights (no
  faster: the scalar lookup was latency-bound, not memory-bound -- every point in one
  table cell cost the same); a float32 table (no faster, also alternating); fewer beta
  panels (N_PANELS = 12 puts the identity map 8.8e-10 off the Gaussian path, above the
  1e-10 of its test: the Gaussian path's own beta is 1.5e-10 off a 24-panel value, as is
  the stack's with 14); 7 nodes of ln g (f(M) against 33 nodes: 1.9e-6 at f_NL = 1 but
  5e-5 at -1, above the doubling test's 1e-5; the nodes are already Chebyshev-Lobatto
  with barycentric interpolation); compiling the rest of the local bound (its compiled
  near-branch search is 0.31 of its 0.49 ms).

* ngspeed7 branch, this file run against main 9a77b8b alternately (30 blocks, 9 runs
  each over two sets, the last after every change; machine shared with other jobs,
  load average 1.8-4.2).  This machine's numpy has no AVX-512, so its float64 exp is
  libm's per element (5.5-9 ns, against ~1 ns assumed above): main measures local f_NL
  = 1 3.65-4.24x, f_NL = -1 2.85-3.17x, logarithmic 6.00-6.71x here; the branch
  2.50-3.12x, 2.34-2.63x and 2.98-3.52x.  With --qcd (20 blocks, 4 runs each over two
  sets): QCD-era local f_NL = 1 3.95-4.21x -> 3.26-3.52x, f_NL = -1 3.10-3.32x ->
  2.61-2.77x, logarithmic 6.52-7.16x -> 3.99-4.36x.  The Gaussian QCD stack (the
  threshold plan, unchanged but for the rule's nodes) measured 3.03-3.24x on main and
  5.04-5.61x on the branch in those runs, but 3.06x and 3.19x with glibc's mmap and trim
  thresholds fixed (MALLOC_MMAP_THRESHOLD_=64 MB, MALLOC_TRIM_THRESHOLD_=256 MB, 1 run
  each; the other rows as without: branch 3.07x, 2.46x, 3.24x, QCD 3.35x, 2.71x,
  3.75x): the difference is the allocator's state left by the interleaved functions
  (its dynamic mmap threshold decides whether the Gaussian QCD stack's large
  temporaries come with page faults, ~2x on this VM: 6-7 ms interleaved, 12-20 ms
  called alone, on either tree), not its code.  The changes, each
  measured side by side in one process (min of 30-40 alternating calls, the
  logarithmic map's 7.4k pairs): (1) the stacked beta on 80 nodes (dyadic panels and a
  16-point Gauss-Jacobi edge, scan/observables/pbh/ng_beta_nodes.py) instead of 120:
  6.3 -> 4.4 ms; the Gaussian path's own beta made accurate first (48 points in z =
  t^1.3, abundance.beta_rule: 2.3e-12 of QAWS-level references against 4e-10 before),
  and the identity map is now 1.3e-12 from the Gaussian stack (was 6.3e-12; QCD-era
  6.4e-10 -> 1.3e-12); (2) exp by a vectorised Cody-Waite loop
  (scan/observables/pbh/vector_math.py, 1.4-1.75 ns per element, within 1 ulp of
  numpy's) in beta and the mass function: beta 4.4 -> 2.0 ms; (3) the mass function
  only at each epoch's masses of non-zero weight (49 % of the grid): 2.67 -> 1.80 ms;
  (4) the logarithmic closed form's logarithms in one vectorised pass: 1.7 -> 1.4 ms.
  Results against main: f(M) within 6e-15 (local and logarithmic maps) and totals
  within 3.5e-10 (the beta rules; the Gaussian totals moved 1.5e-10, the QCD-era ones
  1.5e-11).  Tried and not kept: the table lookup of ln H in a pass of its own (1.4 ->
  2.0 ms); 56 points in z for the Gaussian rule (1.1e-13, but the QCD-era Gaussian
  stack's per-pair beta 15-35 % slower); exp_in_place in chunks of 512 with a 4 kB
  scratch instead of one of the array's size (logarithmic evaluate 5.9-6.0 -> 8.5-8.8
  ms: the chunked loops lost their speed, cause not pinned down).  A lead: with glibc's
  thresholds fixed as above the capped stack measured 7.3-7.8 ms instead of 9.9-10.4 ms
  and the Gaussian stack interleaved with it a median of 1.84 instead of 3.0 ms (one
  process each, alternating): page faults from large temporaries cost on this VM.

* lead27 against main a6f410a, alternately (3 runs each at each of three stages, machine
  quiet, the Gaussian stack 1.8-3.2 ms): (1) the logarithmic map gets a bound on ln g
  over [y_th, 4/3] (ng_capped.min_exponent: the least joint exponent over the points its
  density integrates), so its pairs are pruned as the local map's (7409 -> 6488 computed
  here: its heavy tail keeps most within e^{-100}); (2) beta of the pairs an a-priori
  analytic-error test admits (78 % of them here) by 24-node Gauss-Jacobi instead of 80
  nodes (ng_beta_nodes.gentle_rule: 1.9 -> 1.5 ms on the 7.4k pairs, one process);
  (3) Estrin's scheme in the erfc/ln H tables (density 1.40 -> 1.33 ms).  Final stage:
  local f_NL = 1 3.02-3.14x (main, same runs) vs 2.71-2.96x (its code unchanged: the
  noise of these ratios is ~0.2), f_NL = -1 2.49-2.82x vs 2.27-2.42x, logarithmic
  3.20-3.34x -> 2.84-3.02x (earlier stages: 2.87-2.92x against main's 3.08-3.69x, and
  2.96-3.12x against 2.88-3.33x).  Results: totals within 1.9e-14 (logarithmic) of main,
  f(M) bit-identical wherever >= 1e-30 of its largest value.  (4) The local map's table
  path (ng_table.tabulated_ln_h) with its logarithms in vectorised passes, alternately
  against main e8a834a, 3 runs (machine busier, Gaussian medians 3.0-3.8 ms): local
  f_NL = 1 2.83-3.04x -> 2.36-2.49x, f_NL = -1 2.27-2.58x -> 2.05-2.15x (logarithmic,
  unchanged code: 2.93-3.15x vs 2.91-3.11x); f(M) within 1.2e-13 where >= 1e-30 of its
  largest value, totals within 9.2e-14.  Issue 15's <= 3x: met by the local stacks; at
  the edge on this machine for the logarithmic one (2.8-3.2x over runs).

* qcdspeed branch (the threshold plan's per-pair beta quadrature and critical mass
  function as compiled block loops with vectorised exp/log, scan/observables/pbh/
  pair_beta.py and pair_mass.py), this file with --qcd --blocks 15 run against main
  88a344e alternately, 3 runs each (nice 15, load average ~0.5): the Gaussian QCD stack
  4.75-4.97x -> 0.96-1.25x the tabulated Gaussian stack (medians 14.6-16.0 ms -> 3.7 ms);
  the other rows are the same code on both (main / branch: local f_NL = 1 2.37-2.51x /
  2.29-2.79x, logarithmic 2.93-3.10x / 2.47-3.26x, QCD-era logarithmic 3.38-3.63x /
  3.60-4.65x, medians equal within 0.3 ms: noise of the min-based Gaussian reference).
  By parts (manual timers, one process): main's 12.5-18 ms were beta 10.5 ms (5.0 ms
  with its temporaries paged in: the logs and exps 1.7 ms each, libm per element) and the
  mass function 6.5 ms; now beta 0.9-1.2 ms (3.1k live pairs x 48 nodes; per node log
  2.3 ns, exp 1.8 ns, the three other passes 4.6 ns in all; 16 to 512 pairs per block
  measured alike), mass function 0.5-0.6 ms, variances 0.2 ms.
  Results against main on these spectra: f(M) within 6.7e-16 where >= 1e-30 of its
  row's largest value, totals within 4.4e-16 (the plain threshold plan, per-row C_th in
  [0.4, 0.6]: 6.7e-16 and 2.2e-16); exponents below -708 now give exactly 0 (7 values of
  f(M) that were below 1.8e-301).

* qcdgentle branch (the gentle beta tiers with per-epoch exponents: each epoch
  Gauss-Jacobi of its own gamma_c, the a-priori test with the largest; the per-epoch
  rules and the tier choice as compiled passes, ng_pairs.epoch_betas / first_passing),
  this file with --qcd --blocks 15 run against main f940958 alternately, 3 runs each,
  four sets (nice 15, another job on one core, load average 1.3-1.9).  QCD-era
  logarithmic: before the compiled tier choice 3.48-3.58x -> 3.32-3.42x and 3.39-3.58x
  -> 3.50-4.37x; with the final tree 3.16-3.57x -> 3.17-3.48x and 3.40-3.54x ->
  3.06-3.40x: the min-based reference's noise (the plain rows, the same code on both,
  move as much) is larger than the gain.  Against the plain logarithmic row of the same
  run: 1.17-1.18 -> 1.09-1.11, 1.19-1.23 -> 1.07-1.12, and with the final tree 1.12-1.23
  -> 1.05-1.12 (one more run at 1.39, its plain row at 2.27x).  The local maps have no
  gentle pairs (every one fails the test), so their rows are the same code but the
  test's cost (~50 us per evaluation with first_passing): QCD-era f_NL = 1 2.41-2.89x
  -> 2.34-2.91x, -1 1.70-2.40x -> 2.14-2.40x (final tree).  In one process
  (StackedNGPlan.evaluate of the logarithmic map with and without the gentle rules, 60
  alternating calls, thread time, 3 runs): QCD-era 5.98-6.64 -> 5.39-6.03 ms (min;
  0.89-0.91x, medians 0.89-0.94x), the plain stack 0.95-0.96x (medians 0.96-0.99x): the
  QCD-era stack is now 1.07-1.09x the plain one (was 1.18-1.22x).  5810 of the 6490
  QCD-era logarithmic pairs take 12, 16 or 24 nodes (3907, 1301, 602) instead of 88.
  Results against main: f(M) identical (beta does not enter it), totals within 2.4e-14
  (both conventions; 2.0e-14 with gamma-of-w alone), the local maps' bit-identical; the
  tiers' betas within 5.1e-14 of a tanh-sinh reference, main's 88-node rule within
  9.4e-13 of it.

* lead28 (the stacked path's glue compiled -- row_extremes in one pass, group_max
  instead of np.maximum.at, the live pairs by flat index -- and the gentle beta rule in
  tiers of 12/16/24 nodes, each pair the fewest its a-priori test admits: the
  logarithmic map's beta nodes 190.6k -> 131.8k), with the threshold plan of qcdspeed,
  this file with --qcd --blocks 15 (main f940958 before qcdgentle) against main 88a344e
  alternately, 3 runs each (nice 15, another job on one core): local f_NL = 1
  2.60-2.76x -> 2.54-2.75x, f_NL = -1 2.21-2.31x -> 2.11-2.31x, logarithmic
  3.03-3.20x -> 2.94-3.12x (by parts in one process the glue and tiers take ~0.4 ms of
  the logarithmic stack's ~9 ms: within these ratios' noise); QCD-era: the Gaussian
  stack 5.11-7.38x -> 1.20-1.29x, local f_NL = 1 3.00-3.07x -> 2.73-2.86x, f_NL = -1
  2.40-2.46x -> 2.24-2.43x, logarithmic 3.74-3.96x -> 3.46-3.74x.  Results: f(M)
  bit-identical, totals within 1.6e-15 (the tiers).  Tried and not kept: the
  logarithmic closed form in three passes (branch-free parts, the ln H table, the
  cases) to let the compiler vectorise: 1.41 -> 1.78 ms (the table lookup does not
  vectorise; the extra passes cost memory traffic); a fused compiled beta kernel
  (interpolation loop, exponential, weighted sum): 1.05 -> 1.25 ms on the 24-node pairs
  (numba's interpolation loop ~3 ns an element against BLAS's 1.4).

What limited it before (measured by parts, ngspeed3): the Gaussian stack is ~2 ms.  Local map:
the ridge integrals (72 % of the time: three Newton searches, ~5 steps each from the
conditional-mean seeds and up to 16 from the curve seed, and a 16-node rule per
density; ~1 us per density) for 2.5k of 3.6k live pairs x 9 nodes; the pairs the
cut keeps are mostly needed (with the exact values ~1.96k move some f(M) >= 1e-30 max
or the total by > 1e-16), so 3x needs a cheaper density, not fewer pairs.
Logarithmic map: 7.1k live pairs (its heavy tail keeps 2.4x as many as the Gaussian's
3k, and ~6.3k of them move some f(M) >= 1e-30 max by > 1e-16) at 9 nodes: the closed
form ~2 ms, beta ~2.3 ms (a 120-node rule: matmul of 7.1k x 9 by 9 x 120 plus 860k
exponentials), the mass function ~1.3 ms, the variances ~0.4 ms.  A Gauss-Jacobi inner
panel for beta (weight (y - y_th)^gamma_c) needs 88 nodes and is within 1.2e-12 of scipy
quad (QAWS), but the Gaussian path's own beta (48-point Gauss-Legendre in z = ((y -
y_th)/span)^gamma_c) is 1.2e-10 high at sigma = 0.044 (QAWS), so the identity test (1e-10
against the Gaussian path) fails by 1.25e-10 with the more accurate rule (which measured
logarithmic 3.2-3.5x against 3.8-4.0x side by side); it was left as is (done on
ngspeed7 with the Gaussian rule made accurate first, above).  Fewer nodes of ln g: 9 -> 8 moves f(M) by 1e-6 (lambda = 3), 9 -> 7 by 7e-6.

Run:  python tests/bench/bench_pbh_nongaussian.py [--blocks N] [--qcd] [--reference]
"""
from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import sys  # noqa: E402

import numpy as np  # noqa: E402
from _timing import alternating_times, blocks_from_argv, print_ratios  # noqa: E402

from scan.observables.pbh import PBHConventions, plan_pbh  # noqa: E402
from scan.observables.pbh.ng_stack import plan_pbh_mapped, plan_stacked  # noqa: E402
from scan.observables.pbh.nongaussian import plan_nongaussian  # noqa: E402
from scan.observables.pbh.zeta_map import zeta_map_of  # noqa: E402

M_SPECTRA, BLOCKS = 64, 3


def spectra(k: np.ndarray) -> np.ndarray:
    """The 64 log-normal spectra [1] on ``k`` [Mpc^-1]."""
    rng = np.random.default_rng(1)
    ln_kp = rng.uniform(13.5, 15.5, M_SPECTRA)[:, None]
    amp = 10.0 ** rng.uniform(-2.6, -2.0, M_SPECTRA)[:, None]
    return amp * np.exp(-(np.log(k)[None, :] - ln_kp)**2 / 0.5) / np.sqrt(0.5 * np.pi)


def main() -> None:
    k = np.geomspace(1e5, 1e8, 300)
    conv = PBHConventions(window="top-hat", threshold=0.55)
    plan = plan_pbh(k, np.geomspace(1e-2, 1e3, 32), conv, n_formation=128)
    ng = plan_nongaussian(plan, 128)
    stacked = plan_stacked(ng)
    P = spectra(k)
    maps = {"local f_NL=1": zeta_map_of("local", f_nl=1.0),
            "local f_NL=-1": zeta_map_of("local", f_nl=-1.0),
            "logarithmic lambda=3": zeta_map_of("logarithmic", log_lambda=3.0)}
    funcs = {"gaussian stack": lambda: plan.evaluate(P)}
    for name, zmap in maps.items():
        funcs[f"stacked {name}"] = lambda zmap=zmap: stacked.evaluate(P, zmap)
        if "--reference" in sys.argv:
            funcs[f"per-spectrum {name}"] = lambda zmap=zmap: [ng.evaluate(row, zmap)
                                                               for row in P]
    if "--qcd" in sys.argv:
        qcd = plan_pbh_mapped(k, plan.M, conv, maps["local f_NL=1"], n_formation=128,
                              qcd_threshold="harada-scaled", qcd_collapse="gamma-of-w")
        funcs["gaussian stack QCD"] = lambda: qcd.gaussian.evaluate(P)
        for name, zmap in maps.items():
            funcs[f"stacked QCD {name}"] = lambda zmap=zmap: qcd.stacked.evaluate(P, zmap)
    print_ratios(alternating_times(funcs, blocks_from_argv(BLOCKS)))


if __name__ == "__main__":
    main()
