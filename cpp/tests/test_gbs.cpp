// Tests of the Newtonian N-body engine and the Gragg-Bulirsch-Stoer integrator (gbs.hpp), against
// things outside the project: the exact Kepler two-body solution, conservation of energy and
// momentum, time reversibility, and the Pythagorean three-body problem's exact energy.
// Plain main(); exits non-zero on any failed check and prints a short table. Build by hand:
//   g++ -std=c++17 -O3 -Wall -Wextra -ffp-contract=off -mfma -I cpp/include cpp/tests/test_gbs.cpp
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include <loschmidt/methods/gbs.hpp>
#include <loschmidt/methods/status.hpp>
#include <loschmidt/nbody/diagnostics.hpp>
#include <loschmidt/nbody/forces.hpp>
#include <loschmidt/nbody/state.hpp>

#include <loschmidt/scalar/scalar.hpp>

using namespace loschmidt;

static int failures = 0;
static void check(bool ok, const std::string& what) {
  if (!ok) {
    ++failures;
    std::printf("FAIL: %s\n", what.c_str());
  }
}

// ---------------------------------------------------------------- working-precision helpers
template <class T>
double eps_of() { return scalar_traits<T>::epsilon(); }

// pi by Machin's formula, pi = 16 atan(1/5) - 4 atan(1/239), series summed in T.
template <class T>
T atan_inv(int x) {
  const T xx = T(x) * T(x);
  T power = T(1) / T(x);  // 1 / x^(2k+1)
  T sum = T(0);
  for (int k = 0; k < 400; ++k) {
    const T term = power / T(2 * k + 1);
    if (k % 2 == 0) sum += term; else sum -= term;
    if (std::fabs(to_double(term)) < 1e-3 * eps_of<T>() * std::fabs(to_double(sum))) break;
    power = power / xx;
  }
  return sum;
}
template <class T>
T pi_of() { return T(16) * atan_inv<T>(5) - T(4) * atan_inv<T>(239); }

// sin and cos by Taylor series on x/4 followed by two double-angle steps, in T.
template <class T>
void sincos_of(const T& x0, T& s, T& c) {
  const T twopi = T(2) * pi_of<T>();
  const double kq = std::nearbyint(to_double(x0) / to_double(twopi));
  const T x = (x0 - T(kq) * twopi) / T(4);
  T term = x, ss = x;
  for (int k = 1; k < 200; ++k) {
    term = -term * x * x / (T(2 * k) * T(2 * k + 1));
    ss += term;
    if (std::fabs(to_double(term)) < 1e-3 * eps_of<T>()) break;
  }
  term = T(1);
  T cc = T(1);
  for (int k = 1; k < 200; ++k) {
    term = -term * x * x / (T(2 * k - 1) * T(2 * k));
    cc += term;
    if (std::fabs(to_double(term)) < 1e-3 * eps_of<T>()) break;
  }
  for (int d = 0; d < 2; ++d) {
    const T s2 = T(2) * ss * cc;
    const T c2 = cc * cc - ss * ss;
    ss = s2;
    cc = c2;
  }
  s = ss;
  c = cc;
}

// Eccentric anomaly from Kepler's equation E - e sin E = M, Newton's method in T.
template <class T>
T solve_kepler(const T& M, const T& e) {
  T s, c;
  sincos_of(M, s, c);
  T E = (to_double(e) > 0.8) ? pi_of<T>() * (to_double(M) >= 0 ? T(1) : T(-1)) : M + e * s;
  const T twopi = T(2) * pi_of<T>();
  // reduce M to [-pi, pi] for the starting guess
  const double kq = std::nearbyint(to_double(M) / to_double(twopi));
  const T Mr = M - T(kq) * twopi;
  E = (to_double(e) > 0.8) ? pi_of<T>() * (to_double(Mr) >= 0 ? T(1) : T(-1)) : Mr + e * s;
  for (int it = 0; it < 100; ++it) {
    sincos_of(E, s, c);
    const T dE = (E - e * s - Mr) / (T(1) - e * c);
    E -= dE;
    if (std::fabs(to_double(dE)) < 1e-2 * eps_of<T>()) break;
  }
  return E + T(kq) * twopi;
}

// ---------------------------------------------------------------- Kepler two-body problem
// Masses 3/4 and 1/4 (total 1), semimajor axis 1, so the period is 2 pi. Start at pericentre, centre
// of mass at rest at the origin, orbit in a tilted plane spanned by the rational orthonormal pair
// e1 = (2, 2, 1)/3, e2 = (-2, 1, 2)/3 so that every coordinate is exercised.
template <class T>
struct Kepler {
  T e, m1, m2, M, a;
  T e1[3], e2[3];
  explicit Kepler(const T& ecc) : e(ecc) {
    m1 = T(3) / T(4);
    m2 = T(1) / T(4);
    M = m1 + m2;
    a = T(1);
    const int u[3] = {2, 2, 1}, w[3] = {-2, 1, 2};
    for (int d = 0; d < 3; ++d) {
      e1[d] = T(u[d]) / T(3);
      e2[d] = T(w[d]) / T(3);
    }
  }
  T period() const { using std::sqrt; return T(2) * pi_of<T>() * sqrt(a * a * a / M); }
  State<T> at(const T& t) const {
    using std::sqrt;
    const T nmean = sqrt(M / (a * a * a));
    const T E = solve_kepler(nmean * t, e);
    T s, c;
    sincos_of(E, s, c);
    const T b = sqrt(T(1) - e * e);
    const T X = a * (c - e), Y = a * b * s;
    const T f = nmean * a / (T(1) - e * c);
    const T VX = -f * s, VY = f * b * c;
    State<T> st(2);
    st.m[0] = m1;
    st.m[1] = m2;
    for (int d = 0; d < 3; ++d) {
      const T r = X * e1[d] + Y * e2[d];
      const T v = VX * e1[d] + VY * e2[d];
      st.x[d] = -(m2 / M) * r;
      st.x[3 + d] = (m1 / M) * r;
      st.v[d] = -(m2 / M) * v;
      st.v[3 + d] = (m1 / M) * v;
    }
    return st;
  }
};

template <class T>
double position_error(const State<T>& a, const State<T>& b) {
  using std::sqrt;
  T s = T(0);
  for (std::size_t k = 0; k < a.x.size(); ++k) s += (a.x[k] - b.x[k]) * (a.x[k] - b.x[k]);
  return to_double(sqrt(s));
}

template <class T>
Options make_options(double tol) {
  Options o;
  o.rtol = tol;
  o.atol = tol;
  return o;
}

struct KeplerResult {
  double max_err, energy_err, roundtrip;
  Stats fwd, back;
  double wall;
};

// Integrate `periods` periods with 8 outputs per period, compare every output with the exact
// solution; then integrate back to t = 0 (backward) and compare with the start.
template <class T, bool C = false>
KeplerResult run_kepler(double ecc_num, int periods, double tol, StepSequence seq = StepSequence::consecutive,
                        const StepControlTuning& tune = {}) {
  const T ecc = T(static_cast<int>(std::lround(ecc_num * 100))) / T(100);
  Kepler<T> kep(ecc);
  const T P = kep.period();
  State<T> s = kep.at(T(0));
  const State<T> s0 = s;
  const T E0 = energy(s);
  std::vector<T> outs;
  for (int i = 1; i <= 8 * periods; ++i) outs.push_back(P * T(i) / T(8));
  T t = T(0);
  const T t_end = P * T(periods);
  KeplerResult r{};
  Options opt = make_options<T>(tol);
  opt.sequence = seq;
  auto c0 = std::chrono::steady_clock::now();
  double maxerr = 0;
  bool exact_times = true;
  r.fwd = integrate_gbs<T, C>(
      s, t, t_end, outs,
      [&](int i, const T& tt, const State<T>& st) {
        if (!(tt == outs[static_cast<std::size_t>(i)])) exact_times = false;
        maxerr = std::max(maxerr, position_error(st, kep.at(tt)));
      },
      opt, tune);
  check(exact_times, "outputs land exactly on the requested times");
  check(t == t_end, "forward run lands exactly on t_end");
  r.max_err = maxerr;
  r.energy_err = std::fabs(to_double((energy(s) - E0) / E0));
  const T zero = T(0);
  r.back = integrate_gbs<T, C>(s, t, zero, opt, tune);
  check(t == zero, "backward run lands exactly on t = 0");
  r.roundtrip = to_double(phase_space_distance(s, s0));
  r.wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - c0).count();
  return r;
}

// ---------------------------------------------------------------- Pythagorean three-body problem
// Burrau 1913; Szebehely & Peters 1967, AJ 72, 876: masses 3, 4, 5 at rest at (1,3), (-2,-1),
// (1,-1). Exact energy E = -769/60 (from the initial conditions), L = 0, P = 0.
template <class T>
State<T> pythagorean() {
  State<T> s(3);
  const int m[3] = {3, 4, 5};
  const int xy[3][2] = {{1, 3}, {-2, -1}, {1, -1}};
  for (int i = 0; i < 3; ++i) {
    s.m[i] = T(m[i]);
    s.x[3 * i] = T(xy[i][0]);
    s.x[3 * i + 1] = T(xy[i][1]);
  }
  return s;
}

struct PythResult {
  double roundtrip, energy_err70, momentum70, angular70;
  Stats fwd, back;
  double wall;
  bool landed;
};

template <class T, bool C = false>
PythResult run_pythagorean(double tol, double t_final = 70, StepSequence seq = StepSequence::consecutive,
                           const StepControlTuning& tune = {}, int max_order = 0) {
  State<T> s = pythagorean<T>();
  const State<T> s0 = s;
  const T E0 = T(-769) / T(60);
  Options opt = make_options<T>(tol);
  opt.sequence = seq;
  opt.max_order = max_order;
  T t = T(0);
  const T t_end = T(static_cast<int>(t_final));
  PythResult r{};
  auto c0 = std::chrono::steady_clock::now();
  r.fwd = integrate_gbs<T, C>(s, t, t_end, opt, tune);
  r.landed = (t == t_end);
  r.energy_err70 = std::fabs(to_double((energy(s) - E0) / E0));
  // Linear and angular momentum are exactly zero initially (bodies at rest, centre of mass at the
  // origin); the integrator conserves both (common practice), so they must stay at round-off.
  const auto P = linear_momentum(s);
  const auto L = angular_momentum(s);
  r.momentum70 = r.angular70 = 0;
  for (int d = 0; d < 3; ++d) {
    r.momentum70 = std::max(r.momentum70, std::fabs(to_double(P[d])));
    r.angular70 = std::max(r.angular70, std::fabs(to_double(L[d])));
  }
  const T zero = T(0);
  r.back = integrate_gbs<T, C>(s, t, zero, opt, tune);
  r.landed = r.landed && (t == zero);
  r.wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - c0).count();
  r.roundtrip = to_double(phase_space_distance(s, s0));
  return r;
}

// ---------------------------------------------------------------- individual checks
template <class T>
void check_forces() {
  // Newton's third law and the exact two-body value: masses 1 and 2 at distance 2 on the x axis.
  State<T> s(2);
  s.m[0] = T(1);
  s.m[1] = T(2);
  s.x[3] = T(2);
  std::vector<T> a;
  accelerations(s, a);
  check(a[0] == T(2) / T(4) && a[3] == -(T(1) / T(4)), "two-body acceleration m/r^2");
  State<T> p = pythagorean<T>();
  accelerations(p, a);
  T f[3] = {T(0), T(0), T(0)};
  for (int i = 0; i < 3; ++i)
    for (int d = 0; d < 3; ++d) f[d] += p.m[i] * a[3 * i + d];
  check(std::fabs(to_double(f[0])) + std::fabs(to_double(f[1])) < 64 * eps_of<T>(),
        "sum of m a vanishes (third law)");
  const T E = energy(p);
  check(std::fabs(to_double((E - T(-769) / T(60)) / E)) < 16 * eps_of<T>(),
        "Pythagorean energy equals -769/60");
}

void check_status_table() {
  check(std::string(status_name(Status::success)) == "success", "status_name(success)");
  check(std::string(status_name(Status::nonfinite)) == "nonfinite", "status_name(nonfinite)");
  check(std::string(status_name(Status::step_underflow)) == "step_underflow", "status_name(step_underflow)");
  for (int i = 0; i < status_count(); ++i)
    check(std::string(status_message(static_cast<Status>(i))).size() > 10, "status_message present");
}

// Budgets and failure statuses: nothing may loop forever.
void check_budgets() {
  State<double> s = pythagorean<double>();
  double t = 0;
  Options o = make_options<double>(1e-12);
  o.max_steps = 5;
  Stats st = integrate_gbs<double>(s, t, 70.0, o);
  check(st.status == Status::max_steps && st.steps + st.rejected == 5, "max_steps budget");
  s = pythagorean<double>();
  t = 0;
  o = make_options<double>(1e-12);
  int calls = 0;
  o.poll = [&]() { return ++calls >= 2; };
  st = integrate_gbs<double>(s, t, 1e6, o);
  check(st.status == Status::interrupted || st.status == Status::step_underflow, "poll interrupts");
  s = pythagorean<double>();
  t = 0;
  o = make_options<double>(1e-12);
  o.max_wall_time = 0.01;
  st = integrate_gbs<double>(s, t, 1e9, o);
  check(st.status == Status::max_wall_time && st.wall_time < 0.5, "max_wall_time budget");
  // Head-on collision from rest: the step must shrink to the floor, not loop forever.
  State<double> c(2);
  c.m[0] = c.m[1] = 1;
  c.x[0] = -1;
  c.x[3] = 1;
  t = 0;
  st = integrate_gbs<double>(c, t, 10.0, make_options<double>(1e-12));
  check(st.status == Status::step_underflow || st.status == Status::nonfinite, "collision ends in step_underflow");
  // Coincident bodies: non-finite accelerations.
  State<double> z(2);
  z.m[0] = z.m[1] = 1;
  t = 0;
  st = integrate_gbs<double>(z, t, 1.0, make_options<double>(1e-12));
  check(st.status == Status::nonfinite, "coincident bodies give nonfinite");
  // Invalid output times are rejected before any work.
  s = pythagorean<double>();
  t = 0;
  bool threw = false;
  try {
    integrate_gbs<double>(s, t, 1.0, std::vector<double>{0.5, 0.25}, [](int, const double&, const State<double>&) {},
                          make_options<double>(1e-10));
  } catch (const std::invalid_argument&) {
    threw = true;
  }
  check(threw, "unsorted output times throw invalid_argument");
}

// The planar fast path (D = 2) must give exactly the bits of the three-dimensional path, and the
// three-pass force kernel exactly the bits of the single-pass one.
template <class T>
void check_planar_bits() {
  State<T> a = pythagorean<T>(), b = a;
  T ta = T(0), tb = T(0);
  const T t_end = T(5);
  Options o = make_options<T>(std::max(1e-12, 1e4 * eps_of<T>()));
  const std::vector<T> none;
  auto noop = [](int, const T&, const State<T>&) {};
  Stats sa = integrate_gbs<T>(a, ta, t_end, o);  // dispatches to the planar path
  const int rows = scalar_traits<T>::default_max_order();
  Stats sb = detail::run_gbs<3, T, false>(b, tb, t_end, none, noop, o, StepControlTuning{}, rows,
                                          std::chrono::steady_clock::now());
  bool same = sa.steps == sb.steps && sa.evaluations == sb.evaluations && ta == tb;
  for (int k = 0; k < 9; ++k) same = same && a.x[k] == b.x[k] && a.v[k] == b.v[k];
  check(same, std::string("planar path gives the 3D path's bits (") + scalar_traits<T>::name + ")");
  std::vector<T> f1(9), f2(9);
  PairWorkspace<T> w;
  w.setup(3);
  accelerations(3, a.m.data(), a.x.data(), f1.data());
  accelerations(3, a.m.data(), a.x.data(), f2.data(), w);
  bool fsame = true;
  for (int k = 0; k < 9; ++k) fsame = fsame && f1[k] == f2[k];
  check(fsame, "three-pass force kernel gives the single-pass bits");
}

// Output bookkeeping: every output time is hit exactly, in order, once each (duplicates and an
// output at t_end included), backward as well as forward; a single free body moves exactly.
void check_outputs() {
  for (int direction : {1, -1}) {
    State<double> s = pythagorean<double>();
    double t = 0;
    const double t_end = 2.0 * direction;
    const std::vector<double> outs = {0.25 * direction, 0.5 * direction, 0.5 * direction, 1.0 * direction,
                                      t_end};
    std::vector<int> seen;
    bool exact = true;
    Stats st = integrate_gbs<double>(
        s, t, t_end, outs,
        [&](int i, const double& tt, const State<double>&) {
          seen.push_back(i);
          exact = exact && tt == outs[static_cast<std::size_t>(i)];
        },
        make_options<double>(1e-12));
    check(st.status == Status::success && t == t_end, "run with outputs lands on t_end");
    check(seen == std::vector<int>({0, 1, 2, 3, 4}) && exact, "each output time hit exactly, once, in order");
  }
  State<double> one(1);
  one.m[0] = 1;
  one.v[0] = 0.5;
  one.v[2] = -0.25;
  double t = 0;
  Stats st = integrate_gbs<double>(one, t, 8.0, make_options<double>(1e-12));
  check(st.status == Status::success && std::fabs(one.x[0] - 4.0) < 1e-14 && std::fabs(one.x[2] + 2.0) < 1e-14,
        "free body moves uniformly");
  State<double> s = pythagorean<double>();
  t = 1.5;
  st = integrate_gbs<double>(s, t, 1.5, make_options<double>(1e-12));
  check(st.status == Status::success && st.steps == 0 && s.x[0] == 1.0, "t_end == t does nothing");
}

// ---------------------------------------------------------------- report
template <class T, bool C = false>
void kepler_table(const char* name, const std::vector<double>& tols, int periods,
                  StepSequence seq = StepSequence::consecutive) {
  for (double ecc : {0.5, 0.9}) {
    double prev = 1e300;
    for (double tol : tols) {
      KeplerResult r = run_kepler<T, C>(ecc, periods, tol, seq);
      std::printf("%-5s kepler e=%.1f %3dP tol=%.0e  maxerr=%9.2e  dE/E=%9.2e  roundtrip=%9.2e  "
                  "steps=%6lld rej=%4lld evals=%8lld  %.3fs\n",
                  name, ecc, periods, tol, r.max_err, r.energy_err, r.roundtrip, r.fwd.steps,
                  r.fwd.rejected, r.fwd.evaluations, r.wall);
      check(r.fwd.status == Status::success && r.back.status == Status::success, "kepler run succeeds");
      // Bounds, measured here (f64, dd, qd) with a margin of about 10: the tolerance bounds the
      // local error of each step; the energy error grows about linearly with the number of steps,
      // and the phase error it causes grows quadratically with time, so errors are scaled by
      // tol * periods^2. The round trip ends at pericentre, where a phase error shows up multiplied
      // by the acceleration (~M / r_p^2 = 100 for e = 0.9), hence its larger constant.
      const double unit = std::max(tol, 1e3 * eps_of<T>());
      check(r.max_err < 2e4 * unit * periods * periods, "kepler error within bound");
      check(r.energy_err < 3e2 * unit * periods, "kepler energy conserved");
      check(r.roundtrip < 5e5 * unit * periods * periods, "kepler round trip returns");
      if (tol >= 1e4 * eps_of<T>()) check(r.max_err < prev, "error falls with tolerance");
      prev = r.max_err;
    }
  }
}

template <class T, bool C = false>
PythResult pythagorean_row(const char* name, double tol) {
  PythResult r = run_pythagorean<T, C>(tol);
  std::printf("%-5s pythagorean 0->70->0 tol=%.0e  roundtrip=%9.2e  dE/E(70)=%9.2e  |P|,|L|(70)=%8.1e,%8.1e  "
              "steps=%5lld+%-5lld rej=%4lld evals=%8lld  %.3fs\n",
              name, tol, r.roundtrip, r.energy_err70, r.momentum70, r.angular70, r.fwd.steps, r.back.steps,
              r.fwd.rejected + r.back.rejected, r.fwd.evaluations + r.back.evaluations, r.wall);
  check(r.fwd.status == Status::success, "pythagorean forward run succeeds");
  // Linear momentum is a linear invariant: each leapfrog row conserves it and the extrapolation
  // is a linear combination of rows, so only round-off remains (momentum scale ~4 x 100 at the
  // close encounters, random walk over ~3000 steps, amplified by the tableau; measured 3e4 eps in
  // f64, 2e5 eps in dd). Angular momentum is quadratic: the leapfrog conserves it, the
  // extrapolated combination only to the local error, so it is bounded by the tolerance
  // (measured L / tol: 97 f64, 16 dd, 0.04 qd).
  check(r.momentum70 < 4e6 * eps_of<T>(), "pythagorean linear momentum stays zero");
  check(r.angular70 < 1e3 * std::max(tol, 1e3 * eps_of<T>()), "pythagorean angular momentum stays ~zero");
  return r;
}

int main(int argc, char** argv) {
  const bool full = (argc > 1 && std::string(argv[1]) == "--full");
  check_status_table();
  check_forces<double>();
  check_budgets();
  check_planar_bits<double>();
  check_outputs();

  kepler_table<double>("f64", {1e-6, 1e-9, 1e-12}, 10);
  kepler_table<double>("f64", {1e-12}, 100);
  kepler_table<double>("f64/h", {1e-12}, 10, StepSequence::harmonic);  // the classical sequence
  kepler_table<double>("f64", {1e-13}, 100);  // beside f64c at the same tolerance
  kepler_table<double, true>("f64c", {1e-13}, 100);
  {
    // In double the Pythagorean round trip does not return (the problem's chaos amplifies the
    // local errors past order one); the forward leg must still succeed and conserve energy.
    PythResult r = pythagorean_row<double>("f64", 1e-13);
    check(r.energy_err70 < 1e-8, "f64 pythagorean energy conserved");
  }
  pythagorean_row<double, true>("f64c", 1e-13);

  check_forces<dd>();
  check_planar_bits<dd>();
  kepler_table<dd>("dd", {1e-20, 1e-28}, 10);
  {
    PythResult r = pythagorean_row<dd>("dd", 1e-28);
    check(r.back.status == Status::success && r.landed, "dd pythagorean round trip succeeds and lands exactly");
    // Target of the design: round trip <= 1e-14 in double-double at tolerance ~1e-28.
    check(r.roundtrip <= 1e-14, "dd pythagorean round trip <= 1e-14");
    // Exact energy -769/60 (from the initial conditions).
    check(r.energy_err70 < 1e-21, "dd pythagorean energy conserved");  // measured 2e-23
  }
  check_forces<qd>();
  kepler_table<qd>("qd", {1e-40}, full ? 10 : 2);
  if (full) {
    PythResult r = pythagorean_row<qd>("qd", 1e-40);
    check(r.back.status == Status::success && r.landed && r.roundtrip < 1e-20, "qd pythagorean round trip");
  }
  std::printf("%s (%d failures)\n", failures ? "FAILED" : "all checks passed", failures);
  return failures ? 1 : 0;
}
