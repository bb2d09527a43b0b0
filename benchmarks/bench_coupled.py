"""Segregated SIMPLEC against the simultaneous u-v-p solve (``solver.coupling = "simultaneous"``) on
the grid families of issue #15: outer iterations, seconds, cost per cell and iteration, growth per
4x cells, and whether both give the same answers.

Families (uniform start, each case's own settings and stopping rule, i.e. residuals below the case's
tolerance and the monitored quantities settled):
  cavity  the bundled cavity case (Re 100) on 64^2, 128^2, 256^2 quads (``mesh.generate.cavity``);
  plate   the bundled turbulent flat plate (SA, tolerance 1e-8) on the coarse / medium / fine family
          (``flat_plate_family``): the answer compared is Cf(0.97) and the plate's Cd;
  step    the bundled turbulent step (SA, tolerance 7e-7) on coarse / medium (/ fine) (``step_family``):
          the answer compared is the reattachment point x_r / H on the lower wall.
For every grid both algorithms run; printed: cells, converged flag, iterations, wall seconds,
microseconds per cell and iteration, that over a numpy triad ``a = b + s c`` on arrays of cell length
timed in the same run, the growth of the iteration count from the previous (4x smaller) grid, and the
relative difference of the compared quantity plus max |u_sim - u_seg| / U_ref. Numba compilation is
excluded by a warm-up run. No assertions; the machine is shared, so read the triad ratio.

Measured 2026-12-03 01:40-03:00 with system_solver = "iterative" (FGMRES + pressure convection-diffusion
block preconditioner, the default now; 2 shared cores, load 4-5; SIMPLEC's cost per iteration from 100
iterations on the same grid; /tmp/coupled3/fam.py, same families and settings as this script):
  cavity 64^2 / 128^2 / 256^2: 40 / 40 / 42 outer its, 9.9 / 10.3 / 10.4 FGMRES its per outer iteration,
      1.0 / 3.8 / 18.8 s; us per cell and iteration 5.8 / 5.8 / 6.8 = 5.2 / 6.4 / 4.7 x SIMPLEC's (1.1 / 0.9 / 1.5)
      after the implicit wall flux and pressure-gradient extrapolation of the outer iteration landed:
      14 / 14 / 12 outer its, 20.1 / 24.0 / 28.3 FGMRES per outer, 0.9 / 3.9 / 19.5 s, 9.9 / 12.0 / 16.3 x
      SIMPLEC's cost per cell and iteration; with system_tolerance 0.1: 128^2 / 256^2 16 / 18 its, 3.3 / 12.5 s
  plate coarse / medium / fine: 46 / 45 / diverged at 36 its; 22.9 / 34.6 / ~84 FGMRES per outer (the fine
      plate's solves missed the tolerance at iteration 23 and the sparse LU took over); 2.7 / 14.1 s;
      6.0 / 8.8 x SIMPLEC's cost per cell and iteration; after the merge: 40 / 45 its, 20.1 / 28.0 FGMRES
      per outer, 2.4 / 12.2 s, 6.0 / 7.4 x
  step coarse / medium: the first solves miss the tolerance (iteration 2), the sparse LU takes over:
      127 / 182 its, 19.3 / 169.9 s
Measured 2026-12-03 04:20-04:45 with system_solver = "iterative" and the least-squares commutator block
preconditioner (the default since; 2 shared cores, load 3.6-3.9; /tmp/par3/fam.py; outer its, FGMRES its per
outer iteration (max), seconds):
  cavity 64^2 / 128^2 / 256^2: 14 / 14 / 14 its, 12.4 / 15.4 / 21.6 (19 / 24 / 33), 1.0 / 4.8 / 28.6 s
      (the pressure convection-diffusion preconditioner at 256^2 in the same hour: 13 its, 28.4 (67), 29.4 s)
  plate coarse / medium: 40 / 45 its, 5.0 (14) / 7.1 (24), 1.5 / 7.4 s (convection-diffusion, load 5:
      38 / 46 its, 20.8 / 29.3, 7.1 / 39.0 s)
  step coarse / medium: 85 / 95 its, no hand-over to the sparse LU, 37.2 (80) / 63.3 (114), 30.6 / 199.7 s
      (peak RSS 305 / 506 MB); with the convection-diffusion preconditioner the LU took over at iteration 2;
      with the momentum blocks relaxed in stretched cells (aspect > 1.5, adopted, 05:28-05:30, load 3.1-3.2):
      step 85 / 93 its, 19.9 (76) / 24.3 (95), 14.7 / 96.8 s; plate 38 / 46 its, 4.8 / 8.0, 1.3 / 7.6 s;
      cavity (uniform quads, no cell relaxed) 64^2 / 256^2 12.4 / 21.6, 1.2 / 43.3 s
  step fine (111k cells): the second outer iteration's solve missed its tolerance (260 FGMRES its), the
      sparse LU took over (RSS 4.2 GB); stopped. With the start-up shift the step cases name
      (momentum_start_shift = 0.1, 2026-12-03 07:27-08:01, load 4.7-6.4, triad 0.060 ms): 96 outer its, no
      hand-over, 86.1 (154) FGMRES per outer, 2 040 s (97 % linear solve), x_r 6.17723901
Measured earlier with system_solver = "direct" (heavily loaded; iterations SIMPLEC -> simultaneous):
  cavity 64^2 / 128^2 / 256^2: 209 / 715 / 2713 -> 40 / 40 / 42 its; 2.4 / 37.2 / 568.9 s -> 3.8 / 24.9 / 55.3 s;
      us per cell and iteration 2.8-3.2 -> 20-38; max |du| / U 3.5e-6 / 7.5e-6 / 9.3e-6
  plate coarse / medium / fine: 243 / 420 / 1596 -> 40 / 45 / diverged at 35 (563 s); 1.3 / 8.3 / 263 s
      -> 1.5 / 22.9 s; Cf(0.97) rel. 1.7e-8 / 2.5e-7
  step coarse / medium: 1668 / not converged in 4000 (793 s) -> 128 / 181 its; 36.7 s -> 22.9 / 357.6 s;
      x_r rel. 2.0e-7 / 6.3e-7 (against the unfinished SIMPLEC run)
  The fine step was not run (SuperLU memory and time).
Turbulent families again after the simultaneous path's default turbulence_cfl became 0 (no pseudo-time
steps; same machine, load about 5; simultaneous path only, iterations to the default stop;
system_solver "direct" unless said; scripts in /tmp/algo3):
  plate coarse / medium: 36 / 45 its (growth 1.25), Cf(0.97) rel. to SIMPLEC 1.8e-8 / 2.5e-7;
      fine: diverged at iteration 32 (829 s; a SuperLU factorisation every iteration), as with CFL 20;
      with the iterative system solver at iteration 30 (346 s); with the iterative solver coarse / medium
      take 38 / 46 its (5.5 / 26.5 s)
  step coarse / medium: 85 / 94 its (growth 1.11; was 127 / 181 = 1.43 with CFL 20); 35 / 182 s
      (triad ratio 1.3e7 / 1.8e7); x_r 6.13293661 / 6.17163486 (SIMPLEC 6.13293663 / 6.171635 at its
      settled stop: rel. 3e-9 / 2e-8)

--memory KIND...: peak memory per cell of each coupling (simultaneous with the iterative solver, which
here never hands over to the sparse LU, and SIMPLEC) on the generated ~400k-cell cavity / SA plate of
``bench_parallel.py`` (``--cells``), after ``--memory-iterations`` simultaneous / 25 SIMPLEC outer
iterations, in a fresh process: peak RSS above the interpreter's baseline (libraries and compiled
kernels loaded) and numpy's traced peak.
--cost [GRID...]: whole runs of the simultaneous path (iterative solve, forced; the case's own settings and
stop, uniform start) on cavity 128^2 / 256^2, plate medium / fine, step coarse / medium, against SIMPLEC's
seconds per iteration (``--simplec-iterations`` from the uniform start) on the same grid, thread count and
machine, one right after the other: outer iterations, FGMRES iterations per outer iteration, seconds, per
outer iteration, per cell, over a numpy triad, over SIMPLEC's; CPU use of each run = (user + system CPU
seconds of the process, every thread) / wall seconds (2.0: both cores busy throughout), CPU seconds per
iteration of each and their ratio (steadier than the wall-clock ratio on a shared machine); for each thread
count of ``--threads`` after the first, the speed-up of the simultaneous run and max |u - u(first)| / max |u|;
the 1-minute load average before / after the run. ``--forcing-max 0``: every FGMRES solve to
system_tolerance (no forcing rule: the figures before it).

Measured 2026-12-03 04:10-04:50 (2 shared cores, load 2.6-4.2), before = main 8ed3fc7 (scipy bmat/COO/products
each outer iteration, FGMRES keeping the preconditioned vectors), after = the system refilled in place on a pattern
made once, the segregated-only state dropped, FGMRES keeping only the Krylov basis:
  --memory (400k cells; RSS above the baseline, KB per cell, numpy's traced peak in brackets):
    | case | coupling | its | FGMRES / it | before | after |
    |---|---|---|---|---|---|
    | cavity 399424 | simultaneous | 8 | 32.1 | 5.43 (5.16) | 4.23 (4.04) |
    | cavity 399424 | SIMPLEC | 25 | - | 2.36 (2.34) | 2.36 (2.34) |
    | SA plate 399843 | simultaneous | 8 | 80.2 | 6.25 (5.80) | 4.78 (4.56) |
    | SA plate 399843 | SIMPLEC | 25 | - | 2.92 (2.87) * | 2.91 (2.88) |
  (* from bench_parallel.py's table of the same code; the segregated path is unchanged)
  --cost (4 runs each, before and after interleaved; the machine's load swings whole iterations by +-50 %:
  best of the runs, s per outer iteration; x SIMPLEC = over SIMPLEC's s per iteration in the same run, range):
    | case | FGMRES / it | simultaneous s/it before / after | x SIMPLEC before / after | assembly s/it before / after |
    |---|---|---|---|---|
    | cavity 128^2 (16384) | 23.9 / 23.9 | 0.265 / 0.270 | 9.0-12.1 / 8.1-12.9 | 0.033-0.051 / 0.014-0.019 |
    | plate medium (13056) | 30.0 / 30.0 | 0.426 / 0.288 | 7.7-8.7 / 8.3-11.3 | 0.042-0.045 / 0.009-0.016 |
  The assembly fell from about one SIMPLEC iteration to a third-half of one; the outer iteration is the FGMRES
  solve (three V-cycles per FGMRES iteration), so its cost stays 8-13x SIMPLEC's. One solve at a fixed state
  (cavity 128^2, 22 FGMRES iterations, best of 6): 0.30 s keeping the preconditioned vectors, 0.29 s keeping the
  basis only (two more preconditioner applications).
  (--cost then ran 12 outer iterations of the cavity 128^2 and the medium plate, with an assembly column.)
Measured 2026-12-03 07:15-07:31 (--cost, 1 thread; 2 shared cores, other processes holding 1.7-5 of them: the CPU
use column shows the share this run got): before = every FGMRES solve to 0.01 (--forcing-max 0, load 1.7-2.9),
after = the forcing rule (FORCING_MAX 0.02, load 2.7-5; before the one-pass Gram-Schmidt, which leaves the counts
as they are and saved ~4 % more on the cavity 256^2); x SIMPLEC = s per outer iteration over SIMPLEC's s per
iteration in the same process a minute later:
    | grid (cells) | outer | FGMRES per outer | s per outer | x SIMPLEC | CPU use |  (each: before / after)
    |---|---|---|---|---|---|
    | cavity 128^2 (16384) | 14 / 14 | 15.4 / 14.5 | 0.306 / 0.647 | 16.6 / 14.4 | 1.23 / 0.49 |
    | cavity 256^2 (65536) | 14 / 14 | 21.6 / 19.6 | 1.840 / 3.296 | 22.0 / 21.4 | 0.99 / 0.50 |
    | plate medium (13056) | 34 / 34 | 7.9 / 6.3 | 0.192 / 0.263 | 6.7 / 5.6 | 1.02 / 0.67 |
    | plate fine (52224) | 36 / 38 | 19.7 / 16.4 | 1.326 / 1.326 | 10.6 / 10.1 | 1.02 / 0.90 |
    | step coarse (6912) | 84 / 86 | 20.0 / 16.3 | 0.193 / 0.190 | 8.4 / 7.5 | 1.11 / 0.99 |
    | step medium (27648) | 90 / 98 | 25.8 / 18.8 | 0.871 / 0.671 | 8.5 / 6.7 | 1.07 / 1.07 |
  Seconds across the two columns are not comparable (load); the FGMRES counts and the ratio to SIMPLEC in the same
  process are. Total FGMRES iterations -6 % (cavity 128^2) to -21 % (step medium); outer iterations +0 to +9 %
  (step medium 98; earlier runs at 0.01 took 90-95). Answers: step medium x_r 6.17163477 (6.17163484 at 0.01),
  plate Cf(0.97) unchanged to 10 digits. A V-cycle is 2.0 ms at 16k rows (V(0,0), residual and transfers only:
  1.0 ms); each FGMRES iteration takes 4 (2 Laplacian, u, v), SIMPLEC's whole iteration about 4-6: at 15-20 FGMRES
  iterations per outer iteration the V-cycles alone are 10-15 SIMPLEC iterations' worth (cavity 256^2 profile: V-cycles
  64 %, scipy products 11 %, Gram-Schmidt 9 %). Momentum V-cycles with one sweep instead of two: V(0,1) cavity
  128^2 203 -> 212 FGMRES in all, but plate medium 215 -> 816 and step coarse 1405 -> 1825; V(1,0) plate 343: rejected.

Measured 2026-12-03 06:50-08:20 (2 shared cores, load 1.6-6), memory of the iterative path's preconditioner and
Krylov basis (least-squares commutator: Ruge-Stuben coarsening with the second pass instead of CLJP, hierarchies
and the FGMRES basis in float32, no copies of G / D / the momentum blocks, Lq refilled in place, the assembly's
work arrays freed before the solve):
  --memory (400k cells, 8 simultaneous iterations; RSS above the baseline, KB per cell, traced in brackets;
  FGMRES iterations per outer iteration):
    | case | before (main 2cc1833, closing note) | with a shared u-v hierarchy (9021fe6) | after |
    |---|---|---|---|
    | cavity 399424 | 5.27 (4.77), 91.5 | 3.31 (3.24), 43.0 | 3.30 (3.17), 43.0 (load 5.9) |
    | SA plate 399843 | 5.88 (5.33) | 3.98 (3.86), 70.6 | 4.00 (3.81), 71.2 (load 3.5) |
  (SIMPLEC in the same runs: cavity 2.33, plate 2.92.) The "after" column keeps a momentum hierarchy for each of u
  and v: one shared hierarchy (the middle column) saved ~0.2 KB per cell but cost whole plate runs 7.3 / 14.0
  FGMRES iterations per outer iteration (coarse / medium) against 5.0 / 7.9. Still above 3 KB per cell; what is
  held at the peak (traced, cavity 160k): mesh and geometry 0.40, the segregated solver's state 0.9, the system
  0.53 and G 0.13, the preconditioner ~0.7 (two hierarchies of ~225 bytes, Lq, weights), FGMRES 0.42 (basis 0.25);
  the plate adds its turbulence model's state and linear solver (~0.6).
  FGMRES iterations per outer iteration / outer iterations of whole runs (case settings, settled stop, uniform
  start, system_solver "iterative"; the same script before and after, load 3.5-5.9; cavity's before from the
  same recipe at 05:30):
    cavity 64^2 / 128^2 / 256^2: 12.4 / 15.4 / 21.6 (14 / 14 / 14 outer) -> 12.7 / 16.1 / 21.2 (16 / 14 / 12)
    plate coarse / medium: 5.0 / 7.9 (36 / 34) -> 5.0 / 7.9 (34 / 32)
    step coarse / medium: 20.0 / 26.1 (84 / 89) -> 18.7 / 23.2 (81 / 90)
  plate medium, interleaved at load 4.9-5.2: 25.3 / 25.7 s before, 18.4 / 20.7 s after

Measured 2026-12-03 09:30-10:35 (2 shared cores, load 1.5-3.3), what the simultaneous path holds (the assembly's
work made and let go per part of the assembly, dcoef / kvec and the velocity gradient made again after the solve,
M^-1 only next to boundaries, one least-squares gradient operator per mesh, no zero / body-force buffers, the
model's coefficient set and solver vectors only during its update, FGMRES without copies of r0 or of the product,
freed heap pages handed back at four points per outer iteration; the same bits):
  --memory (400k cells, 8 simultaneous iterations; RSS above the baseline, KB per cell, traced in brackets):
    cavity 399424: 3.30 (3.17) last session -> 2.82 (2.64) before the page hand-back, 38.6 FGMRES per outer
    SA plate 399843: 4.00 (3.81) last session -> 3.41 (3.04) before the page hand-back -> 3.19 (2.99), 57.9 FGMRES
    per outer (the counts are main 0e8e541's: the changes keep the bits)
  Whole runs (iterative solve, one thread), main 0e8e541 / after, interleaved twice: cavity 128^2 14 outer, 15.07
  FGMRES per outer both, 0.308, 0.178 / 0.298, 0.188 s per outer; plate medium 34 outer, 6.62 both, 0.102, 0.145 /
  0.107, 0.112 s per outer; the answers identical to the last digit.

Measured 2026-12-03 12:10-12:50 (2 shared cores, load 2.7-4.4), the multigrid restriction applied from P's rows
(R = P^T not stored), G held only in the system's momentum rows, the faces' quality measures made when read, the
cycle's residual one level at a time, E made again after the solve (the same bits, the same FGMRES counts):
  --memory (400k cells, 8 simultaneous iterations; RSS above the baseline, KB per cell, traced in brackets;
  before = main fb41c24 in the same session):
    cavity 399424: 2.65 (2.66) -> 2.37 (2.37), FGMRES 11/41/30/39/40/39/56/53 (38.6 per outer) both
    SA plate 399843: 3.21 (3.01) -> 2.96 (2.70), FGMRES 3/100/72/120/23/33/61/14 (53.3 per outer) both; again
    after merging main 0acb7b5 (load 1-3): 2.93 (2.70), the same counts
  Cost: one FGMRES iteration's preconditioner and product at 52k cells (plate, one thread) 33.9-34.8 ms before,
  34.7-35.6 ms after (quiet repetitions; the others were twice as long, the core shared): a product with G
  reads the strided system rows (0.55 triads against scipy's 0.23), twice per preconditioner application.

Measured 2026-12-03 11:59-12:48 (--cost; 2 shared cores, load 0.4 at the first runs, then 3.7-4.7; wall seconds under
that load measure the scheduler, so the CPU seconds per iteration are given as well), before = main fb41c24 (+ the
restriction from P's rows), after = unsigned CSR indices in the multigrid kernels, the preconditioner's sparse
products and the system product in numba, the fused Gram-Schmidt, OpenMP threads waiting asleep; the same bits
(u, p, FGMRES counts) throughout. Interleaved whole runs, one thread, CPU s per outer iteration (/tmp/par6/ab.py):
cavity 128^2 0.188 / 0.189 -> 0.140 / 0.129 (SIMPLEC 0.0191 -> 0.0148 per iteration: the same multigrid kernels),
plate medium 0.112 / 0.118 -> 0.092 / 0.091 (SIMPLEC 0.0318 -> 0.0244). Cavity 256^2 at one state: FGMRES
iteration 54 -> 36 ms (preconditioner 37 -> 20 ms, Gram-Schmidt step 10.1 -> 7.6 ms in context).
    | grid (cells) | outer | FGMRES / outer | x SIMPLEC before (wall, load) | x SIMPLEC after (CPU s, load) | CPU use |
    |---|---|---|---|---|---|
    | cavity 128^2 (16384) | 14 | 15.1 | 9.5 (0.8) | 9.8-10.3 (3.8-4.0) | 0.49-0.50 |
    | cavity 256^2 (65536) | 12 | 19.9 | 15.9 (3.7) | 14.1-14.9 (4.0-4.6) | 0.52-0.54 |
    | plate medium (13056) | 38 | 6.3 | 3.5 (0.9) | 3.8-3.9 (4.0-4.5) | 0.50-0.79 |
    | plate fine (52224) | 38 | 13.2 | 10.1 (last session) | 6.1 (4.3): 46.5 s wall, 23.2 CPU s | 0.50 |
    | step coarse (6912) | 88 | 14.3 | 4.3 (3.2) | 4.3 (4.2-4.4) | 0.50 |
  Two threads (--threads 1 2), load 3.7-4.0: before (OpenMP threads spinning) cavity 128^2 0.197 s per outer
  iteration on 2 against 0.180 on 1 (load 0.9), plate medium 0.999 against 0.108 (load 1.1-2.4), cavity 256^2
  2.57 against 1.25 (load 2.9-3.7); after cavity 128^2 0.350 / 0.359 (speed-up 1.03), plate medium 0.202 / 0.196
  (0.97), cavity 256^2 0.925 / 1.750 (1.89; CPU use 0.96 against 0.52: the one-thread run got half a core), the
  same bits (du 0). Both cores busy (CPU use ~2) was not seen: the other processes held 3-4 cores' worth all
  session. The ratio to SIMPLEC hardly moves: the faster multigrid kernels serve SIMPLEC's solves as well, and an
  FGMRES iteration is four V-cycles against SIMPLEC's 4-6 per whole iteration, so at 15-20 FGMRES iterations per
  outer iteration (cavity) the V-cycles alone are 10-15 SIMPLEC iterations' worth; 3x needs ~4 FGMRES iterations
  per outer iteration, not cheaper kernels.
  Whole runs at load 1.1-1.7 (13:01-13:04, /tmp/par6/ab.py, before = the same script on fb41c24 + 64bc249; numpy
  triad of 52k doubles 0.029 ms), s per outer iteration on one thread (CPU use 1.00) before -> after, SIMPLEC's:
    fine plate (52224 cells, 38 outer, 13.2 FGMRES per outer): 0.806 -> 0.563 s (30.6 -> 21.4 s; 2 threads 18.6 s,
      CPU use 1.34); SIMPLEC 0.130 -> 0.096 s per iteration; x SIMPLEC 6.2 -> 5.9
    cavity 256^2 iterative (65536 cells, 12 outer, 19.9 per outer): 1.221 -> 0.875 s (14.7 -> 10.5 s; 2 threads
      7.7 s, CPU use 1.45); SIMPLEC 0.088 -> 0.064 s; x SIMPLEC 14.0 -> 13.6

Measured 2026-12-03 15:20-15:32 (2 shared cores; another process held one core nearly throughout, load 1.3-2.5),
before =
main eec6cd4, after = the Gram-Schmidt sums laid out for the processor's overlap (four dot chains at once, subtraction
by row blocks), the first forward sweep of a V-cycle level skipping the zero terms, continuity_rows by position marks,
the set-up's colouring / inverse diagonals / coarsest inverse and face_coefficients in numba: the same bits (u, p,
answers, outer and FGMRES counts identical). Interleaved whole runs (iterative forced), one thread, CPU s per outer
iteration, 3 runs each (/tmp/par7/exp.py): cavity 128^2 0.166 / 0.167 / 0.172 -> 0.144 / 0.143 / 0.147, plate medium
0.115 / 0.112 / 0.117 -> 0.108 / 0.107 / 0.105, step coarse 0.089 / 0.089 / 0.090 -> 0.086 / 0.086 / 0.085; one run:
cavity 256^2 0.998 -> 0.896, fine plate 0.704 -> 0.670; SIMPLEC (100 its) cavity 128^2 0.0181 -> 0.0174, plate medium
0.0278 -> 0.0275 s. --cost tables of both trees (load 1.3-2.5; x SIMPLEC by CPU s; 2 threads gave CPU use 0.99-1.07:
the second core was taken):
    | grid (cells) | outer | FGMRES / outer | x SIMPLEC before | x SIMPLEC after |
    |---|---|---|---|---|
    | cavity 128^2 (16384) | 13 | 15.2 | 8.9 | 8.7 (interleaved runs: 9.3 -> 8.3) |
    | cavity 256^2 (65536) | 12 | 19.9 | 14.5 | 13.0 |
    | plate medium (13056) | 25 | 6.6 | 4.3 | 4.0 (interleaved: 4.1 -> 3.9) |
    | plate fine (52224) | 25 | 13.7 | 6.5 | 6.5 |
    | step coarse (6912) | 77 | 14.2 | 4.2 | 4.1 |
  Left per outer iteration on the medium plate (101 ms): FGMRES 47 ms (V-cycles 28, at their floor: a Gauss-Seidel row
  waits for the one before it), pyamg set-ups 18 (7 of 25 outer iterations; 72 % inside pyamg), the SA update 19 (its
  BiCGStab 14-16: the same V-cycles), assembly 12. A looser SA solve (turbulence_tolerance 0.03 / 0.1) moved Cf(0.97)
  by 5e-8 - 6e-7; numeric-only hierarchy refreshes (P kept, Galerkin products in numba, 4 ms a hierarchy) doubled the
  plate's FGMRES counts or, made every outer iteration, cost more than the 7-9 % of FGMRES iterations they saved; fewer
  rebuilds took the coarse plate from 25 to 40-55 outer iterations. None was kept.

Measured 2026-12-03 16:00-16:07 (idle machine, load 0.6-1.1 with this script, main ab400d3; --cost --parts,
one thread; each part in SIMPLEC iterations: assembly / set-up / Krylov / sparse LU / model / other = x SIMPLEC):
  iterative: cavity128 14 outer, 8.8 FGMRES each: 0.87 / 0.62 / 3.40 / - / - / 0.67 = 6.3; cavity256 14, 10.4:
      0.84 / 0.52 / 5.21 / - / - / 0.72 = 7.9; plate-medium 25, 6.6: 0.44 / 0.63 / 1.60 / - / 0.72 / 0.37 = 3.9;
      plate-fine 25, 13.7: 0.45 / 0.39 / 3.81 / - / 0.96 / 0.39 = 6.1; step-coarse 87, 14.9: 0.33 / 0.26 / 2.80 /
      - / 0.39 / 0.28 = 4.2; two threads: CPU use 1.06-1.32, speed-up 0.82-1.16, the same bits
  by-size (the sparse LU below 30 000 / 70 000 cells): cavity128 13 outer: 0.88 / - / 1.76 / 5.38 / - / 0.40 = 9.3;
      cavity256 13: 0.91 / - / 2.31 / 8.12 / - / 0.37 = 12.4; plate-medium 22: 0.46 / - / 1.08 / 4.93 / 0.79 / 0.24
      = 7.7; step-coarse (its case names the LU) 30: 0.40 / - / 0.58 / 3.31 / 0.50 / 0.28 = 5.3; two threads: CPU
      use 1.00-1.02

Run:  python benchmarks/bench_coupled.py [--families cavity plate step] [--fine-step] [--only simultaneous]
      python benchmarks/bench_coupled.py --memory cavity plate [--cells 400000] [--memory-iterations 8]
      python benchmarks/bench_coupled.py --cost [cavity128 plate-medium ...] [--threads 1 2] [--forcing-max 0]
                                         [--parts] [--system-solver by-size]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.mesh.generate import cavity, flat_plate_family, step_family
from fvrans.post.separation import reattachment_x

ROOT = Path(__file__).resolve().parents[1]
ALGORITHMS = ("simplec", "simultaneous")


def grids(family: str, fine_step: bool) -> list[tuple[str, fa.Problem]]:
    if family == "cavity":
        case = fa.load_case(ROOT / "cases" / "cavity_re100.toml")
        return [(f"{n}^2", fa.prepare(case, mesh=cavity(n))) for n in (64, 128, 256)]
    if family == "plate":
        case = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml")
        return [(lv, fa.prepare(case, mesh=flat_plate_family(lv))) for lv in ("coarse", "medium", "fine")]
    case = fa.load_case(ROOT / "cases" / "step_medium.toml")
    levels = ("coarse", "medium", "fine") if fine_step else ("coarse", "medium")
    return [(lv, fa.prepare(case, mesh=step_family(lv))) for lv in levels]


def answer(family: str, r: fa.Result) -> float:
    """The compared quantity: cavity u at the centre cell, plate Cf(0.97), step x_r / H."""
    if family == "cavity":
        k = int(np.argmin(np.hypot(*(r.cell_centres - 0.5).T)))
        return float(r.velocity[k, 0])
    if family == "plate":
        w = r.wall("plate")
        order = np.argsort(w.x)
        return float(np.interp(0.97, w.x[order], w.cf[order]))
    try:
        return float(reattachment_x(r.wall("lower_wall"), 0.0, 49.0))
    except CaseError:
        return float("nan")


def with_algorithm(problem: fa.Problem, algorithm: str) -> fa.Problem:
    return fa.prepare(problem.case.set("solver.coupling", algorithm), mesh=problem.mesh)


def _count_fgmres() -> list[int]:
    """From now on, the FGMRES iterations of every iterative solve of the simultaneous path."""
    import fvrans.solve.coupled as C

    krylov: list[int] = []
    solve = C.SimultaneousSolver._solve_gmres

    def counted(self, *a, **k):
        x = solve(self, *a, **k)
        krylov.append(self.lin_iterations[-1])
        return x

    C.SimultaneousSolver._solve_gmres = counted
    return krylov


def _child_memory(kind: str, cells: int, iterations: int, coupling: str) -> dict:
    """In a fresh process: peak memory of ``iterations`` outer iterations of ``coupling`` on the
    ~``cells``-cell mesh of ``bench_parallel._memory_mesh``."""
    from bench_parallel import CASES, peak_memory_of_run

    import fvrans.solve.coupled as C

    case = fa.load_case(ROOT / "cases" / CASES[kind]).replace(
        {"solver.coupling": coupling, "solver.system_solver": "iterative", "output.write_fields": False})
    counted: dict[str, list[int]] = {}

    def count_and_keep_iterative() -> None:
        counted["krylov"] = _count_fgmres()  # filled by the solves that follow
        C.FALLBACK_FACTOR = float("inf")  # the iterative solve's memory: no hand-over to the sparse LU

    out = peak_memory_of_run(case, kind, cells, iterations, count_and_keep_iterative)
    return {**out, "krylov": counted["krylov"]}


def memory_table(kinds: list[str], cells: int, iterations: int) -> None:
    print(f"memory: {iterations} simultaneous / 25 SIMPLEC outer iterations (past the first hierarchy rebuild) on "
          f"~{cells} cells, each in a fresh process; KB per cell above the baseline (interpreter, libraries, compiled "
          "kernels); load = 1-minute load average at the start")
    print("case    cells   coupling      its  FGMRES/it  seconds  peak RSS KB/cell  traced KB/cell  load")
    for kind in kinds:
        for coupling in ("simultaneous", "simplec"):
            load = os.getloadavg()[0]
            its = iterations if coupling == "simultaneous" else 25
            out = subprocess.run([sys.executable, __file__, "--child-memory", kind, str(cells), str(its), coupling],
                                 capture_output=True, text=True, check=True)
            m = json.loads(out.stdout.strip().splitlines()[-1])
            nc = m["cells"]
            fg = f"{np.mean(m['krylov']):.1f}" if m["krylov"] else "-"
            print(f"{kind:7s} {nc:6d}  {coupling:12s} {m['iterations']:4d}  {fg:>9s}  {m['seconds']:7.0f}  "
                  f"{(m['peak_rss'] - m['base_rss']) / nc / 1024:16.2f}  {m['traced_peak'] / nc / 1024:14.2f}  "
                  f"{load:4.1f}", flush=True)


COST_GRIDS = ("cavity128", "cavity256", "plate-medium", "plate-fine", "step-coarse", "step-medium")


def _cpu() -> float:
    """CPU seconds of the process, every thread (os.times counts in clock ticks of 10 ms: too coarse for a part)."""
    return time.process_time()


class PartTimer:
    """CPU seconds (every thread of the process) spent in the parts of the simultaneous path's outer
    iteration, each part counted without the parts called inside it: the system's assembly, the block
    preconditioner's set-up, the Krylov iterations (FGMRES, on the block preconditioner or on a kept LU),
    the sparse LU (factorisations and solves), the turbulence model's update; the rest of ``iterate`` is
    "other" (velocity, fluxes and pressure gradient from the solution, Anderson, glue)."""

    PARTS = ("assembly", "set-up", "Krylov", "sparse LU", "model", "other")

    def __init__(self) -> None:
        self.seconds = dict.fromkeys(self.PARTS, 0.0)
        self._stack: list[list] = []
        self._undo: list[tuple[object, str, object]] = []

    def _wrap(self, owner: object, name: str, part: str) -> None:
        inner = getattr(owner, name)
        timer = self

        def timed(*a, **k):
            frame = [part, _cpu(), 0.0]  # part, start, CPU s of the timed parts called inside
            timer._stack.append(frame)
            try:
                return inner(*a, **k)
            finally:
                timer._stack.pop()
                spent = _cpu() - frame[1]
                timer.seconds[part] += spent - frame[2]
                if timer._stack:
                    timer._stack[-1][2] += spent

        self._undo.append((owner, name, inner))
        setattr(owner, name, timed)

    def __enter__(self) -> PartTimer:
        import fvrans.linalg.block_preconditioner as BP
        import fvrans.models.base as MB
        import fvrans.solve.coupled as C

        self._wrap(C.SimultaneousSolver, "iterate", "other")
        self._wrap(C.SimultaneousSolver, "_assemble", "assembly")
        self._wrap(C.SimultaneousSolver, "_solve_direct", "sparse LU")
        self._wrap(C, "fgmres", "Krylov")
        for cls in (BP.LeastSquaresCommutator, BP.PressureConvectionDiffusion, BP.SimpleSchur):
            self._wrap(cls, "update", "set-up")
        for cls in _subclasses(MB.TurbulenceModel):
            if "update" in vars(cls):
                self._wrap(cls, "update", "model")
        return self

    def __exit__(self, *exc) -> None:
        for owner, name, inner in reversed(self._undo):
            setattr(owner, name, inner)
        self._undo.clear()


def _subclasses(cls: type) -> list[type]:
    out = [cls]
    for sub in cls.__subclasses__():
        out += _subclasses(sub)
    return out


def _cost_problem(grid: str) -> fa.Problem:
    """The problem of a ``--cost`` grid name (cavityN, plate-LEVEL, step-LEVEL)."""
    if grid.startswith("cavity"):
        return fa.prepare(fa.load_case(ROOT / "cases" / "cavity_re100.toml"), mesh=cavity(int(grid[6:])))
    family, level = grid.split("-")
    if family == "plate":
        return fa.prepare(fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml"), mesh=flat_plate_family(level))
    return fa.prepare(fa.load_case(ROOT / "cases" / "step_medium.toml"), mesh=step_family(level))


def _timed_run(problem: fa.Problem, case) -> tuple[fa.Result, float, float]:
    """(result, wall seconds, CPU use): CPU use = (user + system CPU seconds of the process, every
    thread) / wall seconds, so 2.0 means both cores busy throughout."""
    c0 = os.times()
    t0 = time.perf_counter()
    r = fa.solve(fa.Problem(case, problem.mesh, problem.geom, problem.boundary))
    wall = time.perf_counter() - t0
    c1 = os.times()
    return r, wall, (c1.user - c0.user + c1.system - c0.system) / wall


def cost_table(grids: list[str], thread_counts: list[int], simplec_iterations: int, forcing_max: float | None,
               system_solver: str = "iterative", parts: bool = False) -> None:
    """Whole runs of the simultaneous path (``system_solver``, iterative unless asked; the case's own stop)
    against SIMPLEC's cost per iteration (``simplec_iterations`` from the uniform start) on the same grid
    and thread count; with ``parts``, the CPU seconds of an outer iteration split by :class:`PartTimer`,
    each part in SIMPLEC iterations."""
    import fvrans.solve.coupled as C

    if forcing_max is not None:
        C.FORCING_MAX = forcing_max  # 0: every solve to system_tolerance (no forcing)
    krylov = _count_fgmres()
    print(f"cost: simultaneous ({system_solver} solve, FORCING_MAX {C.FORCING_MAX}) to the case's own stop, against "
          f"{simplec_iterations} SIMPLEC iterations from the uniform start; CPU use = (user + system CPU s) / wall s; "
          "load = 1-minute load average before / after the simultaneous run; du = max |u - u(1 thread)| / max |u|")
    print("grid          cells  thr  outer  FGMRES/it      s    s/it  us/cell/it  x triad  SIMPLEC s/it  x SIMPLEC  "
          "CPU use sim/SIMPLEC  CPU s/it sim/SIMPLEC  x SIMPLEC (CPU)  speed-up  load       du")
    for grid in grids:
        problem = _cost_problem(grid)
        nc = problem.mesh.n_cells
        first: dict[str, tuple[float, np.ndarray]] = {}
        for thr in thread_counts:
            base = problem.case.replace({"solver.threads": thr, "output.write_fields": False})
            sim = base.replace({"solver.coupling": "simultaneous", "solver.system_solver": system_solver})
            seg = base.replace({"solver.coupling": "simplec", "solver.tolerance": 1e-14, "monitor.settle": False,
                                "solver.max_iterations": simplec_iterations})
            for warm in (sim, seg):  # numba compilation and first-call costs out of the timings
                fa.solve(fa.Problem(warm.set("solver.max_iterations", 2), problem.mesh, problem.geom,
                                    problem.boundary))
            triad = triad_seconds(nc)
            load0 = os.getloadavg()[0]
            krylov.clear()
            timer = PartTimer()
            if parts:
                with timer:
                    r, wall, cpu = _timed_run(problem, sim)
            else:
                r, wall, cpu = _timed_run(problem, sim)
            load1 = os.getloadavg()[0]
            fg = float(np.mean(krylov)) if krylov else float("nan")
            r2, wall2, cpu2 = _timed_run(problem, seg)
            triad = min(triad, triad_seconds(nc))
            per, per2 = wall / max(r.iterations, 1), wall2 / max(r2.iterations, 1)
            if not first:
                first["run"] = (per, r.velocity.copy())
                speed, du = "", ""
            else:
                speed = f"{first['run'][0] / per:8.2f}"
                du = f"{float(np.max(np.abs(r.velocity - first['run'][1]))) / float(np.max(np.abs(r.velocity))):8.1e}"
            # CPU seconds per iteration (every thread): on a shared machine they do not count the time the
            # scheduler gave the core to others, so their ratio is steadier than the wall-clock one
            cper, cper2 = per * cpu, per2 * cpu2
            print(f"{grid:12s} {nc:6d}  {thr:3d}  {r.iterations:5d}  {fg:9.1f}  {wall:6.1f}  {per:6.3f}  "
                  f"{per / nc * 1e6:10.2f}  {per / triad:7.0f}  {per2:12.4f}  {per / per2:9.1f}  "
                  f"{cpu:8.2f} / {cpu2:4.2f}     {cper:7.4f} / {cper2:6.4f}  {cper / cper2:15.1f}  "
                  f"{speed:>8s}  {load0:4.1f}-{load1:4.1f}  {du:>7s}", flush=True)
            if parts:
                n = max(r.iterations, 1)
                split = "  ".join(f"{k} {v / n / cper2:.2f}" for k, v in timer.seconds.items())
                line = f"    per outer iteration, in SIMPLEC iterations (CPU s): {split}"
                if krylov:  # (the iterative solve's FGMRES; the kept LU's are not counted)
                    line += f"; one FGMRES iteration {timer.seconds['Krylov'] / sum(krylov) / cper2:.3f}"
                print(line, flush=True)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--families", nargs="+", default=["cavity", "plate", "step"], choices=["cavity", "plate", "step"])
    ap.add_argument("--fine-step", action="store_true", help="also the fine step (111k cells)")
    ap.add_argument("--only", choices=ALGORITHMS, default=None, help="run one algorithm only")
    ap.add_argument("--memory", nargs="+", choices=["cavity", "plate"], help="memory per cell of both couplings")
    ap.add_argument("--cells", type=int, default=400_000)
    ap.add_argument("--memory-iterations", type=int, default=8)
    ap.add_argument("--cost", nargs="*", choices=COST_GRIDS, default=None,
                    help="seconds per outer iteration of both couplings (whole runs; default: every grid)")
    ap.add_argument("--threads", nargs="+", type=int, default=[1], help="thread counts of --cost (e.g. 1 2)")
    ap.add_argument("--simplec-iterations", type=int, default=100)
    ap.add_argument("--forcing-max", type=float, default=None,
                    help="largest tolerance of the forcing rule (coupled.FORCING_MAX); 0: none")
    ap.add_argument("--system-solver", default="iterative", choices=["iterative", "direct", "by-size"],
                    help="the simultaneous path's linear solver in --cost (default: iterative)")
    ap.add_argument("--parts", action="store_true",
                    help="with --cost: the outer iteration's CPU seconds split into its parts")
    ap.add_argument("--child-memory", nargs=4, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child_memory:
        kind, cells, iterations, coupling = args.child_memory
        print(json.dumps(_child_memory(kind, int(cells), int(iterations), coupling)))
        return 0
    if args.memory or args.cost is not None:
        print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f} at the start (shared)")
        if args.cost is not None:
            cost_table(args.cost or list(COST_GRIDS), args.threads, args.simplec_iterations, args.forcing_max,
                       args.system_solver, args.parts)
        if args.memory:
            memory_table(args.memory, args.cells, args.memory_iterations)
        return 0
    algorithms = ALGORITHMS if args.only is None else (args.only,)
    print("warm-up (numba compilation) ...", flush=True)
    warm = fa.load_case(ROOT / "cases" / "channel_poiseuille.toml").set("solver.max_iterations", 3)
    for alg in ALGORITHMS:
        fa.solve(warm.set("solver.coupling", alg))
    print("family  grid      cells  algorithm     conv  iters  growth   wall[s]  us/cell/it  x triad   answer"
          "          rel.diff   max|du|/U", flush=True)
    for family in args.families:
        previous: dict[str, int] = {}
        for label, problem in grids(family, args.fine_step):
            nc = problem.mesh.n_cells
            triad = triad_seconds(nc, repeats=30)
            results = {}
            for alg in algorithms:
                t0 = time.perf_counter()
                r = fa.solve(with_algorithm(problem, alg))
                wall = time.perf_counter() - t0
                results[alg] = r
                us = wall / max(r.iterations, 1) / nc * 1e6
                growth = r.iterations / previous[alg] if alg in previous else float("nan")
                previous[alg] = r.iterations
                a = answer(family, r)
                extra = ""
                if alg == "simultaneous" and "simplec" in results:
                    s = results["simplec"]
                    b = answer(family, s)
                    u_ref = s.force_reference().velocity or 1.0
                    du = float(np.max(np.abs(r.velocity - s.velocity))) / u_ref
                    extra = f"  {abs(a - b) / abs(b):9.2e}  {du:9.2e}"
                print(f"{family:7s} {label:8s} {nc:6d}  {alg:12s}  {str(r.converged):5s} {r.iterations:5d}  "
                      f"{growth:6.2f}  {wall:8.1f}  {us:10.2f}  {us * 1e-6 * nc / triad:8.0f}   {a:.8e}{extra}",
                      flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
