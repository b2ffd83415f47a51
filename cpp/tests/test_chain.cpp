// Tests of the chain-regularized integrator (chain.hpp, leapfrog.hpp, chain_coordinates.hpp)
// against things outside the project: the exact Kepler two-body solution (elliptic and radial,
// through collision), conservation of energy and angular momentum, time reversibility, the
// Pythagorean three-body problem's exact energy (Burrau 1913; Szebehely & Peters 1967, AJ 72, 876),
// and the independent gbs integrator. Plain main(); exits non-zero on any failed check and prints
// a short table of the measured numbers. Build by hand:
//   g++ -std=c++17 -O3 -Wall -Wextra -ffp-contract=off -mfma -I cpp/include cpp/tests/test_chain.cpp
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include <loschmidt/methods/chain.hpp>
#include <loschmidt/methods/gbs.hpp>
#include <loschmidt/nbody/diagnostics.hpp>
#include <loschmidt/scalar/scalar.hpp>

using namespace loschmidt;

static int failures = 0;
static void check(bool ok, const std::string& what) {
  if (!ok) {
    ++failures;
    std::printf("FAIL: %s\n", what.c_str());
  }
}

template <class T>
double dbl(const T& x) { return to_double(x); }
template <class T>
double eps_of() { return scalar_traits<T>::epsilon(); }

// pi by Machin's formula, pi = 16 atan(1/5) - 4 atan(1/239), series summed in T.
template <class T>
T atan_inv(int x) {
  const T xx = T(x) * T(x);
  T power = T(1) / T(x);
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

template <class T>
T norm3(const T* a) { using std::sqrt; return sqrt(a[0] * a[0] + a[1] * a[1] + a[2] * a[2]); }

template <class T>
Options make_options(double tol) {
  Options o;
  o.rtol = tol;
  o.atol = 0.0;
  return o;
}

// Two bodies m1, m2 on a Kepler orbit of semimajor axis a and eccentricity e, starting at
// apocentre on the +x axis (relative vector x2 - x1), moving in +y; centre of mass at rest at 0.
template <class T>
State<T> binary_at_apocentre(const T& m1, const T& m2, const T& a, const T& e) {
  using std::sqrt;
  State<T> s(2);
  s.m[0] = m1;
  s.m[1] = m2;
  const T M = m1 + m2;
  const T r = a * (T(1) + e);
  const T v = sqrt(M / a * (T(1) - e) / (T(1) + e));
  s.x[0] = -(m2 / M) * r;
  s.x[3] = (m1 / M) * r;
  s.v[1] = -(m2 / M) * v;
  s.v[4] = (m1 / M) * v;
  return s;
}

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

template <class T>
void reverse_velocities(State<T>& s) {
  for (T& v : s.v) v = -v;
}

template <class T>
double relative_energy_error(const State<T>& s, const T& E0) {
  return std::fabs(dbl((energy(s) - E0) / E0));
}

// ---------------------------------------------------------------- A. the raw leapfrog
// The substep alone with a fixed number of steps (no extrapolation), on a Kepler orbit.
template <class T>
struct RawLeapfrog {
  chain::ChainFrame<T> frame;
  chain::RegularizedLeapfrog<T> lf;
  std::vector<T> y, dy;
  RawLeapfrog(const State<T>& s, ChainRegularization reg) {
    frame.setup(s, {});
    lf.setup(s.n, frame.masses(), frame.total_mass(), reg, nullptr);
    y.assign(static_cast<std::size_t>(lf.layout().dim()), T(0));
    dy = y;
    frame.from_state(s, y.data());
    T kin, U;
    frame.energies(y.data(), kin, U);
    y[static_cast<std::size_t>(lf.layout().binding())] = U - kin;
    y[static_cast<std::size_t>(lf.layout().omega())] = U;
  }
  // n leapfrog steps of total fictitious time H.
  void advance(const T& H, int n) {
    lf.increment(y.data(), H, n, dy.data());
    for (std::size_t i = 0; i < y.size(); ++i) y[i] += dy[i];
  }
  // Two-body elements from the link: energy T - U, eccentricity vector.
  void elements(const T& M, T& energy_out, T* evec) {
    const T* X = y.data();
    const T* W = y.data() + 3;
    const T r = norm3(X);
    const T m1 = frame.masses()[0], m2 = frame.masses()[1];
    const T mu = m1 * m2 / M;
    energy_out = mu * (W[0] * W[0] + W[1] * W[1] + W[2] * W[2]) / T(2) - m1 * m2 / r;
    // e = (W x (X x W)) / M - X / r
    const T L[3] = {X[1] * W[2] - X[2] * W[1], X[2] * W[0] - X[0] * W[2], X[0] * W[1] - X[1] * W[0]};
    const T c[3] = {W[1] * L[2] - W[2] * L[1], W[2] * L[0] - W[0] * L[2], W[0] * L[1] - W[1] * L[0]};
    for (int d = 0; d < 3; ++d) evec[d] = c[d] / M - X[d] / r;
  }
};

template <class T>
void test_raw_leapfrog(ChainRegularization reg, const char* name) {
  const T m1 = T(1) / T(2), m2 = T(1) / T(2), M = T(1);
  const T pi = pi_of<T>();
  // Fictitious time per orbit: integral of U dt = m1 m2 P / a = 2 pi m1 m2 sqrt(a / M).
  const T s_orbit = T(2) * pi * m1 * m2;
  for (int ie = 0; ie < 3; ++ie) {
    const int num[3] = {5, 9, 999};
    const int den[3] = {10, 10, 1000};
    const T e = T(num[ie]) / T(den[ie]);
    const State<T> s0 = binary_at_apocentre<T>(m1, m2, T(1), e);
    // (1) Kepler orbit kept: 20 orbits with 40 leapfrog steps per orbit.
    RawLeapfrog<T> lf(s0, reg);
    T E0, e0[3], E1, e1[3];
    lf.elements(M, E0, e0);
    lf.advance(T(20) * s_orbit, 800);
    lf.elements(M, E1, e1);
    const double dE = std::fabs(dbl((E1 - E0) / E0));
    const double de = std::sqrt(dbl((e1[0] - e0[0]) * (e1[0] - e0[0]) + (e1[1] - e0[1]) * (e1[1] - e0[1])));
    // (2) Second order: errors at fixed fictitious time against a 64x finer run.
    auto run = [&](int n) {
      RawLeapfrog<T> r(s0, reg);
      r.advance(s_orbit / T(4), n);
      return r.y;
    };
    const std::vector<T> ref = run(64 * 40);
    auto err = [&](int n) {
      const std::vector<T> yy = run(n);
      double s = 0;
      for (int k = 0; k < 6; ++k) s += std::pow(dbl(yy[static_cast<std::size_t>(k)] - ref[static_cast<std::size_t>(k)]), 2);
      return std::sqrt(s);
    };
    const double e10 = err(10), e20 = err(20), e40 = err(40);
    // (3) Time symmetry: 100 steps forward, 100 back.
    RawLeapfrog<T> sym(s0, reg);
    const std::vector<T> start = sym.y;
    sym.advance(s_orbit * T(3) / T(2), 100);
    sym.advance(-(s_orbit * T(3) / T(2)), 100);
    double back = 0;
    for (std::size_t k = 0; k < start.size(); ++k) back = std::fmax(back, std::fabs(dbl(sym.y[k] - start[k])));
    std::printf("  raw %-5s e=%-6.4g 20 orbits: dE/E=%8.1e |de|=%8.1e  order: %5.2f %5.2f  fwd+back=%8.1e\n", name,
                dbl(e), dE, de, e10 / e20, e20 / e40, back);
    check(std::fabs(e10 / e20 - 4) < 0.3 && std::fabs(e20 / e40 - 4) < 0.3, std::string(name) + " leapfrog is second order");
    check(back < 1e4 * eps_of<T>() * 2, std::string(name) + " leapfrog is time-symmetric");
    // Exact Kepler orbit up to phase (Mikkola & Tanikawa 1999; Preto & Tremaine 1999): energy and
    // eccentricity vector (shape and periapsis direction) conserved to round-off, where a truncation
    // error at 40 steps per orbit would be ~1e-3. Measured for the time-transformed form too.
    check(dE < 1e4 * eps_of<T>() && de < 1e4 * eps_of<T>(), std::string(name) + " leapfrog keeps the Kepler orbit exactly");
  }
  // (4) Radial orbit (e = 1) through 10 collisions with the raw leapfrog: energy kept, bounce.
  {
    State<T> s(2);
    s.m[0] = T(1);
    s.m[1] = T(2);
    s.x[3] = T(1);
    RawLeapfrog<T> lf(s, reg);
    T E0, ev[3], E1;
    lf.elements(T(3), E0, ev);
    // Fictitious time of one radial period: m1 m2 P / a with a = 1/2, M = 3.
    const T s_rad = T(2) * pi_of<T>() * T(2) * sqrt(T(1) / T(2) / T(3));
    double xmin = 1e300;
    for (int k = 0; k < 10 * 40; ++k) {
      lf.advance(s_rad / T(40), 1);
      xmin = std::fmin(xmin, dbl(lf.y[0]));
    }
    lf.elements(T(3), E1, ev);
    const double dE = std::fabs(dbl((E1 - E0) / E0));
    std::printf("  raw %-5s radial 10 periods: dE/E=%8.1e  min x2-x1 at kicks=%8.1e (bounce: stays > 0)\n", name, dE,
                xmin);
    if (reg == ChainRegularization::logarithmic) check(dE < 1e6 * eps_of<T>(), "logarithmic leapfrog keeps the radial orbit's energy");
    check(xmin > 0, std::string(name) + " leapfrog bounces at collision");
  }
}

// ---------------------------------------------------------------- B. head-on collision orbit
// Masses 1 and 2 at rest at distance 1: radial Kepler orbit, a = 1/2, M = 3, mean motion
// nu = sqrt(M / a^3). With eccentric anomaly E (collision at E = 0, time tc = P/2 + k P):
// r = a (1 - cos E), t - tc = (E - sin E) / nu, dr/dt = a nu sin E / (1 - cos E). Anomalies with
// exact sines and cosines: +-pi/3, +-pi/2, +-2pi/3. The regularized orbit bounces: x2 - x1 = r > 0.
template <class T>
void test_head_on() {
  using std::sqrt;
  State<T> s(2);
  s.m[0] = T(1);
  s.m[1] = T(2);
  s.x[3] = T(1);
  const T a = T(1) / T(2), M = T(3), nu = sqrt(M / (a * a * a));
  const T pi = pi_of<T>();
  const T P = T(2) * pi / nu;
  const T s3 = sqrt(T(3)) / T(2);
  struct Anom { int k3; T sinE, cosE; };  // E = k3 * pi / 6
  const Anom an[6] = {{-4, -s3, -(T(1) / T(2))}, {-3, T(-1), T(0)}, {-2, -s3, T(1) / T(2)},
                      {2, s3, T(1) / T(2)}, {3, T(1), T(0)}, {4, s3, -(T(1) / T(2))}};
  const int periods = 10;
  std::vector<T> times, r_exact, v_exact;
  for (int k = 0; k < periods; ++k)
    for (const Anom& q : an) {
      const T E = T(q.k3) * pi / T(6);
      times.push_back(P / T(2) + T(k) * P + (E - q.sinE) / nu);
      r_exact.push_back(a * (T(1) - q.cosE));
      v_exact.push_back(a * nu * q.sinE / (T(1) - q.cosE));
    }
  const T E0 = energy(s);
  double max_r = 0, max_v = 0, max_dE = 0, min_sep = 1e300;
  auto obs = [&](int i, const T&, const State<T>& st) {
    const T X = st.x[3] - st.x[0], V = st.v[3] - st.v[0];
    const std::size_t u = static_cast<std::size_t>(i);
    max_r = std::fmax(max_r, std::fabs(dbl((X - r_exact[u]) / a)));
    max_v = std::fmax(max_v, std::fabs(dbl((V - v_exact[u]) / v_exact[u])));
    max_dE = std::fmax(max_dE, relative_energy_error(st, E0));
    min_sep = std::fmin(min_sep, dbl(X));
  };
  T t = T(0);
  const T t_end = times.back();
  ChainReport rep;
  ChainOptions c;
  c.report = &rep;
  const Stats st = integrate_chain<T>(s, t, t_end, times, obs, make_options<T>(1e-28), c);
  std::printf("  head-on m=1,2 %d collisions tol=1e-28: |dr|/a=%8.1e |dv|/v=%8.1e dE/E=%8.1e steps=%lld evals=%lld\n",
              periods, max_r, max_v, max_dE, st.steps, st.evaluations);
  check(st.status == Status::success && t == t_end, "head-on run succeeds and lands");
  check(min_sep > 0, "head-on orbit bounces (x2 - x1 stays positive)");
  check(max_r < 1e-23 && max_v < 1e-23, "head-on orbit follows the radial Kepler solution");
  check(max_dE < 1e-25, "head-on orbit conserves energy through 10 collisions");

  // Radii: r1 + r2 = a, so contact at E = -pi/2 of the first fall: tc = P/2 + (1 - pi/2)/nu.
  State<T> s2(2);
  s2.m[0] = T(1);
  s2.m[1] = T(2);
  s2.x[3] = T(1);
  ChainOptions cr;
  cr.radii = {0.125, 0.375};
  ChainReport rr;
  cr.report = &rr;
  T t2 = T(0);
  const Stats sc = integrate_chain<T>(s2, t2, T(1), make_options<T>(1e-28), cr);
  const T tc = P / T(2) + (T(1) - pi / T(2)) / nu;
  const double dtc = std::fabs(dbl(t2 - tc));
  const double dsep = std::fabs(dbl(s2.x[3] - s2.x[0] - a));
  std::printf("  contact r1+r2=a: status=%s pair=(%d,%d) |t-tc|=%8.1e |r-(r1+r2)|=%8.1e\n", status_name(sc.status),
              rr.collision_i, rr.collision_j, dtc, dsep);
  check(sc.status == Status::collision && rr.collision_i == 0 && rr.collision_j == 1, "contact reported with its pair");
  check(dtc < 1e-26 && dsep < 1e-26, "contact located at the analytic time");
}

// ---------------------------------------------------------------- C. e = 0.999 over 1000 periods
// Unit masses 1/2 + 1/2, a = 1: P = 2 pi. Apocentre at t = k P (the start), pericentre at
// t = (k + 1/2) P with X = -a (1 - e) x, W = -sqrt(M (1 + e) / (a (1 - e))) y.
template <class T>
void test_eccentric_binary() {
  using std::sqrt;
  const T e = T(999) / T(1000);
  const State<T> s0 = binary_at_apocentre<T>(T(1) / T(2), T(1) / T(2), T(1), e);
  State<T> s = s0;
  const T P = T(2) * pi_of<T>();
  const int checks[4] = {1, 10, 100, 1000};
  std::vector<T> times;
  for (int k : checks) {
    times.push_back((T(k) - T(1) / T(2)) * P);
    times.push_back(T(k) * P);
  }
  const T E0 = energy(s0);
  const T v_apo = sqrt((T(1) - e) / (T(1) + e)), v_peri = sqrt((T(1) + e) / (T(1) - e));
  const T r_peri = T(1) - e;
  double phase_apo = 0, phase_peri = 0, dE_apo = 0, dE_peri = 0;
  auto obs = [&](int i, const T&, const State<T>& st) {
    const T X[3] = {st.x[3] - st.x[0], st.x[4] - st.x[1], st.x[5] - st.x[2]};
    if (i % 2 == 1) dE_apo = std::fmax(dE_apo, relative_energy_error(st, E0));
    else dE_peri = std::fmax(dE_peri, relative_energy_error(st, E0));
    if (i % 2 == 1) {  // apocentre: X = (1 + e, 0, 0); a phase error dt shifts it by v_apo dt along y
      const T X0[3] = {s0.x[3] - s0.x[0], T(0), T(0)};
      const T d[3] = {X[0] - X0[0], X[1], X[2]};
      phase_apo = std::fmax(phase_apo, dbl(norm3(d) / v_apo));
    } else {  // pericentre: X = (-(1 - e), 0, 0)
      const T d[3] = {X[0] + r_peri, X[1], X[2]};
      phase_peri = std::fmax(phase_peri, dbl(norm3(d) / v_peri));
    }
  };
  T t = T(0);
  const Stats st = integrate_chain<T>(s, t, times.back(), times, obs, make_options<T>(1e-28));
  std::printf("  e=0.999 1000P tol=1e-28: dE/E apo=%8.1e peri=%8.1e; phase error (time units) apo=%8.1e peri=%8.1e (/P=%8.1e) steps=%lld evals=%lld %.2fs\n",
              dE_apo, dE_peri, phase_apo, phase_peri, std::fmax(phase_apo, phase_peri) / dbl(P), st.steps, st.evaluations, st.wall_time);
  check(st.status == Status::success, "e=0.999 run succeeds");
  // At apocentre E = T - U is well conditioned (U ~ |E|). At pericentre U/|E| = 2(1+e)/(1-e)/... :
  // the same relative state error gives a (1+e)/(1-e) = 1999 times larger energy error; with the
  // logarithmic Hamiltonian the numerical orbit keeps (T + B)/U = c constant, so the energy error
  // (c - 1) U follows U exactly that way.
  check(dE_apo <= 1e-24, "e=0.999 energy error <= 1e-24 over 1000 periods (apocentre)");
  check(dE_peri <= 1e-24 * 1999, "e=0.999 energy error at pericentre within the conditioning (1+e)/(1-e)");
  check(std::fmax(phase_apo, phase_peri) < 1e-20 * dbl(P), "e=0.999 phase follows the analytic orbit");
}

// ---------------------------------------------------------------- D/E. Pythagorean problem
template <class T>
void test_pythagorean() {
  const T E0 = T(-769) / T(60);
  // D: chain vs gbs at t = 10.
  {
    State<T> a = pythagorean<T>(), b = pythagorean<T>();
    T ta = T(0), tb = T(0);
    const T ten = T(10);
    ChainReport rep;
    ChainOptions c;
    c.report = &rep;
    const Stats sa = integrate_chain<T>(a, ta, ten, make_options<T>(1e-30), c);
    const Stats sb = integrate_gbs<T>(b, tb, ten, make_options<T>(1e-30));
    double scale = 0;
    for (std::size_t k = 0; k < a.x.size(); ++k) scale = std::fmax(scale, std::fabs(dbl(a.x[k])));
    const double dist = dbl(phase_space_distance(a, b));
    std::printf("  pythagorean t=10 tol=1e-30: |chain - gbs|=%8.1e (%.1f digits) dE/E chain=%8.1e gbs=%8.1e rechains=%lld\n",
                dist, -std::log10(dist / scale), relative_energy_error(a, E0), relative_energy_error(b, E0), rep.rechains);
    check(sa.status == Status::success && sb.status == Status::success, "pythagorean t=10 runs succeed");
    check(dist / scale <= 1e-20, "pythagorean chain and gbs agree to >= 20 digits at t = 10");
  }
  // E: round trip 0 -> 70 -> 0 at the loosest tolerance of each method that reaches <= 1e-15
  // (measured ladders: chain 1e-25 -> 1.1e-14, 1e-26 -> 7.5e-16; gbs 1e-28 -> 1.2e-15,
  // 1e-29 -> 4.3e-16).
  auto roundtrip = [&](bool use_chain, double tol, long long& evals, double& e70, long long& rechains) {
    State<T> s = pythagorean<T>();
    const State<T> s0 = s;
    T t = T(0);
    const T t70 = T(70);
    ChainReport rep;
    ChainOptions c;
    c.report = &rep;
    const Options o = make_options<T>(tol);
    const Stats f = use_chain ? integrate_chain<T>(s, t, t70, o, c) : integrate_gbs<T>(s, t, t70, o);
    e70 = relative_energy_error(s, E0);
    rechains = rep.rechains;
    reverse_velocities(s);
    t = T(0);
    const Stats b = use_chain ? integrate_chain<T>(s, t, t70, o, c) : integrate_gbs<T>(s, t, t70, o);
    reverse_velocities(s);
    rechains += rep.rechains;
    evals = f.evaluations + b.evaluations;
    check(f.status == Status::success && b.status == Status::success, "pythagorean round trip runs succeed");
    return dbl(phase_space_distance(s, s0));
  };
  long long ec, eg, rc, rg;
  double e70c, e70g;
  const double dc = roundtrip(true, 1e-27, ec, e70c, rc);
  const double dg = roundtrip(false, 1e-29, eg, e70g, rg);
  std::printf("  pythagorean 0->70->0: chain tol=1e-27 delta=%8.1e evals=%lld dE/E(70)=%8.1e rechains=%lld | gbs tol=1e-29 delta=%8.1e evals=%lld dE/E(70)=%8.1e | ratio %.2f\n",
              dc, ec, e70c, rc, dg, eg, e70g, static_cast<double>(eg) / ec);
  check(dc <= 1e-15, "chain pythagorean round trip <= 1e-15");
  check(ec < eg, "chain needs fewer force evaluations than gbs for a <= 1e-15 round trip");
  check(e70c < 1e-24, "chain pythagorean energy conserved");
  check(rc > 0, "pythagorean run re-chains");
}

// ---------------------------------------------------------------- F. hierarchical triple
// Inner binary 1/2 + 1/2, a = 1, e = 0.9 (period 2 pi); third body of mass 1 at distance 10 on a
// roughly circular, inclined outer orbit. 1000 inner periods.
template <class T>
void test_hierarchical_triple() {
  using std::sqrt;
  const State<T> inner = binary_at_apocentre<T>(T(1) / T(2), T(1) / T(2), T(1), T(9) / T(10));
  State<T> s(3);
  for (int k = 0; k < 6; ++k) {
    s.x[static_cast<std::size_t>(k)] = inner.x[static_cast<std::size_t>(k)];
    s.v[static_cast<std::size_t>(k)] = inner.v[static_cast<std::size_t>(k)];
  }
  s.m[0] = s.m[1] = T(1) / T(2);
  s.m[2] = T(1);
  // Outer relative orbit: R = (0, 10, 0), V = vc (-cos 30deg, 0, sin 30deg), vc = sqrt(2/10);
  // shared so that the centre of mass stays at rest.
  const T vc = sqrt(T(2) / T(10));
  const T ci = sqrt(T(3)) / T(2), si = T(1) / T(2);
  const T R[3] = {T(0), T(10), T(0)};
  const T V[3] = {-(vc * ci), T(0), vc * si};
  for (int d = 0; d < 3; ++d) {
    s.x[static_cast<std::size_t>(d)] -= R[d] / T(2);
    s.x[static_cast<std::size_t>(3 + d)] -= R[d] / T(2);
    s.v[static_cast<std::size_t>(d)] -= V[d] / T(2);
    s.v[static_cast<std::size_t>(3 + d)] -= V[d] / T(2);
    s.x[static_cast<std::size_t>(6 + d)] = R[d] / T(2);
    s.v[static_cast<std::size_t>(6 + d)] = V[d] / T(2);
  }
  const T E0 = energy(s);
  const auto L0 = angular_momentum(s);
  const T L0n = norm3(L0.data());
  T t = T(0);
  const T t_end = T(1000) * T(2) * pi_of<T>();
  ChainReport rep;
  ChainOptions c;
  c.report = &rep;
  const Stats st = integrate_chain<T>(s, t, t_end, make_options<T>(1e-28), c);
  const auto L1 = angular_momentum(s);
  const T dL[3] = {L1[0] - L0[0], L1[1] - L0[1], L1[2] - L0[2]};
  const double dE = relative_energy_error(s, E0), dLr = dbl(norm3(dL) / L0n);
  std::printf("  triple e_in=0.9 1000 inner P tol=1e-28: dE/E=%8.1e |dL|/|L|=%8.1e steps=%lld evals=%lld rechains=%lld %.2fs\n",
              dE, dLr, st.steps, st.evaluations, rep.rechains, st.wall_time);
  check(st.status == Status::success && t == t_end, "hierarchical triple run succeeds");
  check(dE < 1e-25 && dLr < 1e-25, "hierarchical triple conserves energy and angular momentum");
}

// ---------------------------------------------------------------- G. re-chaining
// The re-chaining itself: a state whose chain is stale is rewritten as sums of the old links;
// the energy from the new links, and the positions, agree with the old ones to round-off.
template <class T>
void test_rechain() {
  // Five bodies. The chain built for configuration A is stale for B (bodies 0 and 3 close).
  State<T> A(5);
  const int xa[5][3] = {{0, 0, 0}, {3, 0, 0}, {6, 1, 0}, {9, 0, 1}, {12, 2, 0}};
  const int xb[5][3] = {{0, 0, 0}, {3, 0, 0}, {6, 1, 0}, {1, 1, 1}, {12, 2, 0}};
  const int vv[5][3] = {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {-1, 0, 0}, {0, -1, 1}};
  for (int i = 0; i < 5; ++i) {
    A.m[static_cast<std::size_t>(i)] = T(i + 1) / T(7);
    for (int d = 0; d < 3; ++d) {
      A.x[static_cast<std::size_t>(3 * i + d)] = T(xa[i][d]) / T(3);
      A.v[static_cast<std::size_t>(3 * i + d)] = T(vv[i][d]) / T(5);
    }
  }
  // Zero total momentum and the same centre of mass in A and B (the frame keeps A's centre of
  // mass, so B must share it for its positions to come back; equal to round-off suffices).
  {
    T p[3] = {T(0), T(0), T(0)};
    for (int i = 0; i < 4; ++i)
      for (int d = 0; d < 3; ++d) p[d] += A.m[static_cast<std::size_t>(i)] * A.v[static_cast<std::size_t>(3 * i + d)];
    for (int d = 0; d < 3; ++d) A.v[static_cast<std::size_t>(12 + d)] = -p[d] / A.m[4];
  }
  State<T> B = A;
  for (int i = 0; i < 5; ++i)
    for (int d = 0; d < 3; ++d) B.x[static_cast<std::size_t>(3 * i + d)] = T(xb[i][d]) / T(3);
  {
    const auto ca = center_of_mass(A), cb = center_of_mass(B);
    for (int i = 0; i < 5; ++i)
      for (int d = 0; d < 3; ++d) B.x[static_cast<std::size_t>(3 * i + d)] += ca[static_cast<std::size_t>(d)] - cb[static_cast<std::size_t>(d)];
  }
  chain::ChainFrame<T> f;
  f.setup(A, {});
  std::vector<T> y(static_cast<std::size_t>(6 * 4 + 3), T(0));
  f.from_state(B, y.data());
  T k0, u0, k1, u1;
  f.energies(y.data(), k0, u0);
  const bool stale = f.needs_rechain(y.data());
  const bool changed = f.rechain(y.data(), nullptr);
  f.energies(y.data(), k1, u1);
  State<T> back = B;
  f.to_state(y.data(), T(0), T(0), back);
  const double djump = std::fabs(dbl(((k1 - u1) - (k0 - u0)) / (k0 - u0)));
  const double dpos = dbl(phase_space_distance(back, B));
  const double E = std::fabs(dbl(energy(B)));
  std::printf("  rechain 5 bodies: stale=%d changed=%d energy jump=%8.1e (|E|=%.3f) |state - before|=%8.1e\n", stale,
              changed, djump, E, dpos);
  check(stale && changed, "stale chain detected and rebuilt");
  check(djump < 64 * eps_of<T>() && dpos < 64 * eps_of<T>(), "re-chaining leaves energy and state unchanged");
  check(std::fabs(dbl((k1 - u1 - energy(B)) / energy(B))) < 64 * eps_of<T>(), "chain energy equals the direct energy");

  // In a run: a binary-single exchange-type encounter in which the chain is rebuilt; the energy
  // at every output stays at the tolerance level (no jump when re-chaining).
  State<T> s(4);
  const int p[4][3] = {{-1, 0, 0}, {1, 0, 0}, {-20, 1, 0}, {25, -3, 1}};
  const int v[4][3] = {{0, -3, 0}, {0, 3, 0}, {10, 0, 0}, {-8, 1, 0}};
  for (int i = 0; i < 4; ++i) {
    s.m[static_cast<std::size_t>(i)] = T(1);
    for (int d = 0; d < 3; ++d) {
      s.x[static_cast<std::size_t>(3 * i + d)] = T(p[i][d]) / T(2);
      s.v[static_cast<std::size_t>(3 * i + d)] = T(v[i][d]) / T(10);
    }
  }
  const T E0 = energy(s);
  std::vector<T> times;
  for (int k = 1; k <= 100; ++k) times.push_back(T(k) / T(2));
  double max_dE = 0;
  auto obs = [&](int, const T&, const State<T>& st) { max_dE = std::fmax(max_dE, relative_energy_error(st, E0)); };
  T t = T(0);
  ChainReport rep;
  ChainOptions c;
  c.report = &rep;
  const Stats st = integrate_chain<T>(s, t, times.back(), times, obs, make_options<T>(1e-28), c);
  std::printf("  4-body encounter t=50: rechains=%lld max dE/E over 100 outputs=%8.1e steps=%lld\n", rep.rechains, max_dE,
              st.steps);
  check(st.status == Status::success && rep.rechains > 0, "encounter re-chains");
  check(max_dE < 1e-26, "energy does not jump when re-chaining");
}

// ---------------------------------------------------------------- H. contract
template <class T>
void test_contract() {
  // Exact landing on every output, and the same state as a run without outputs.
  {
    State<T> s = pythagorean<T>(), r = pythagorean<T>();
    std::vector<T> times;
    for (int k = 1; k <= 30; ++k) times.push_back(T(k) / T(10));
    bool exact = true;
    int calls = 0;
    auto obs = [&](int i, const T& tt, const State<T>&) {
      exact = exact && tt == times[static_cast<std::size_t>(i)] && i == calls;
      ++calls;
    };
    T t = T(0), tr = T(0);
    ChainReport rep;
    ChainOptions c;
    c.report = &rep;
    integrate_chain<T>(s, t, T(3), times, obs, make_options<T>(1e-28), c);
    integrate_chain<T>(r, tr, T(3), make_options<T>(1e-28));
    const double d = dbl(phase_space_distance(s, r));
    std::printf("  30 outputs: exact=%d |with - without outputs|=%8.1e newton iterations/landing=%.1f max residual=%8.1e\n",
                exact && calls == 30, d, static_cast<double>(rep.landing_iterations) / rep.landings, rep.landing_residual);
    check(exact && calls == 30 && t == T(3), "lands exactly on every output time");
    check(d < 1e-24, "outputs do not change the solution beyond the tolerance");
    check(rep.landing_residual <= 1024 * eps_of<T>() * 3.1, "Newton landing reaches round-off");
    // Backward: integrate back from t = 3 to 0 (no velocity reversal) returns to the start.
    T tb = t;
    integrate_chain<T>(s, tb, T(0), make_options<T>(1e-28));
    const State<T> p0 = pythagorean<T>();
    const double db = dbl(phase_space_distance(s, p0));
    std::printf("  backward 3 -> 0: |state - start|=%8.1e\n", db);
    check(tb == T(0) && db < 1e-24, "backward integration returns to the start");
  }
  // Budgets and statuses.
  {
    State<T> s = pythagorean<T>();
    T t = T(0);
    Options o = make_options<T>(1e-28);
    o.max_steps = 5;
    check(integrate_chain<T>(s, t, T(70), o).status == Status::max_steps, "max_steps budget");
    s = pythagorean<T>();
    t = T(0);
    o = make_options<T>(1e-28);
    int polls = 0;
    o.poll = [&polls]() { return ++polls > 2; };
    check(integrate_chain<T>(s, t, T(70), o).status == Status::interrupted, "poll interrupts");
    s = pythagorean<T>();
    t = T(0);
    o = make_options<T>(1e-28);
    o.max_wall_time = 1e-4;
    check(integrate_chain<T>(s, t, T(700), o).status == Status::max_wall_time, "wall-time budget");
    s = pythagorean<T>();
    s.x[3] = s.x[0];
    s.x[4] = s.x[1];
    t = T(0);
    check(integrate_chain<T>(s, t, T(1), make_options<T>(1e-20)).status == Status::nonfinite, "coincident bodies: nonfinite");
    bool threw = false;
    try {
      State<T> z = pythagorean<T>();
      T tz = T(0);
      ChainOptions c;
      c.radii = {1.0};
      integrate_chain<T>(z, tz, T(1), make_options<T>(1e-20), c);
    } catch (const std::invalid_argument&) {
      threw = true;
    }
    check(threw, "radii of the wrong size rejected");
    threw = false;
    try {
      State<T> z = pythagorean<T>();
      z.m[1] = z.m[2] = T(0);
      T tz = T(0);
      integrate_chain<T>(z, tz, T(1), make_options<T>(1e-20));
    } catch (const std::invalid_argument&) {
      threw = true;
    }
    check(threw, "fewer than two positive masses rejected");
    // One body: free motion, exact.
    State<T> one(1);
    one.m[0] = T(1);
    one.v[0] = T(1) / T(3);
    T t1 = T(0);
    check(integrate_chain<T>(one, t1, T(3), make_options<T>(1e-20)).status == Status::success && one.x[0] == T(1),
          "one body moves freely");
  }
  // Three bodies with radii: the run stops at the first contact, with that pair exactly touching.
  {
    State<T> s = pythagorean<T>();
    ChainOptions c;
    c.radii = {0.05, 0.05, 0.05};
    ChainReport rep;
    c.report = &rep;
    T t = T(0);
    const Stats st = integrate_chain<T>(s, t, T(70), make_options<T>(1e-28), c);
    double gap = 1e300, others = 1e300;
    for (int i = 0; i < 3; ++i)
      for (int j = i + 1; j < 3; ++j) {
        const T d[3] = {s.x[3 * j] - s.x[3 * i], s.x[3 * j + 1] - s.x[3 * i + 1], s.x[3 * j + 2] - s.x[3 * i + 2]};
        const double g = dbl(norm3(d) - T(0.05) - T(0.05));
        if (i == rep.collision_i && j == rep.collision_j) gap = std::fabs(g);
        else others = std::fmin(others, g);
      }
    std::printf("  pythagorean radii 0.05: status=%s pair=(%d,%d) t=%.6f |r-(ri+rj)|=%8.1e other gaps>=%8.1e\n",
                status_name(st.status), rep.collision_i, rep.collision_j, dbl(t), gap, others);
    check(st.status == Status::collision && gap < 1e-28 && others > 0, "three-body contact located on the first touching pair");
  }
  // The time-transformed leapfrog gives the same Pythagorean solution at t = 10.
  {
    State<T> a = pythagorean<T>(), b = pythagorean<T>();
    T ta = T(0), tb = T(0);
    ChainOptions c;
    c.regularization = ChainRegularization::time_transformed;
    const Stats sa = integrate_chain<T>(a, ta, T(10), make_options<T>(1e-28), c);
    integrate_chain<T>(b, tb, T(10), make_options<T>(1e-28));
    const double d = dbl(phase_space_distance(a, b));
    std::printf("  time-transformed vs logarithmic, pythagorean t=10: %8.1e evals=%lld\n", d, sa.evaluations);
    check(sa.status == Status::success && d < 1e-22, "time-transformed leapfrog agrees");
  }
}

// Other precisions: a short Pythagorean run to t = 10 against gbs.
template <class T, bool C = false>
void test_precision(const char* name, double tol, double bound) {
  State<T> a = pythagorean<T>(), b = pythagorean<T>();
  T ta = T(0), tb = T(0);
  const Stats sa = integrate_chain<T, C>(a, ta, T(10), make_options<T>(tol));
  integrate_gbs<T, C>(b, tb, T(10), make_options<T>(tol));
  const double d = dbl(phase_space_distance(a, b));
  const double dE = relative_energy_error(a, T(-769) / T(60));
  std::printf("  %-4s pythagorean t=10 tol=%.0e: |chain - gbs|=%8.1e dE/E=%8.1e evals=%lld %.2fs\n", name, tol, d, dE,
              sa.evaluations, sa.wall_time);
  check(sa.status == Status::success && d < bound, std::string(name) + " chain agrees with gbs");
}

int main() {
  const auto c0 = std::chrono::steady_clock::now();
  std::printf("chain method tests (dd unless named)\n");
  test_raw_leapfrog<dd>(ChainRegularization::logarithmic, "logH");
  test_raw_leapfrog<dd>(ChainRegularization::time_transformed, "TTL");
  test_head_on<dd>();
  test_eccentric_binary<dd>();
  test_pythagorean<dd>();
  test_hierarchical_triple<dd>();
  test_rechain<dd>();
  test_contract<dd>();
  test_precision<double>("f64", 1e-13, 1e-8);
  test_precision<double, true>("f64c", 1e-14, 1e-8);
  test_precision<qd>("qd", 1e-45, 1e-35);
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - c0).count();
  if (failures) {
    std::printf("FAILED (%d failures) %.1fs\n", failures, wall);
    return 1;
  }
  std::printf("all chain tests passed %.1fs\n", wall);
  return 0;
}
