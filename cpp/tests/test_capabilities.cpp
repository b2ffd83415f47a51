// Tests that every capability works in both methods (gbs and chain) through the one method
// dispatch: stop on escape (Newtonian and post-Newtonian triples), the fixed-step mode (order of
// the chain method measured against the exact Kepler solution), and the shared argument check.
// Checked against things outside the project: the exact Kepler solution (Kepler's equation), the
// radial two-body motion of an escaping body (its time of flight by quadrature of the energy
// equation), and the outcome of the Pythagorean problem (Szebehely & Peters 1967, AJ 72, 876: the
// body of mass 3 escapes, the bodies of mass 4 and 5 stay bound). Plain main(); exits non-zero on
// a failed check. Build by hand:
//   g++ -std=c++17 -O2 -Wall -Wextra -ffp-contract=off -mfma -I cpp/include cpp/tests/test_capabilities.cpp
#include <cmath>
#include <cstdio>
#include <initializer_list>
#include <stdexcept>
#include <string>
#include <vector>

#include <loschmidt/batch.hpp>
#include <loschmidt/methods/dispatch.hpp>
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
double dbl(const T& x) {
  return to_double(x);
}

// ---------------------------------------------------------------- exact Kepler solution
// Relative orbit x2 - x1 of a binary of total mass M = 1, a = 1, eccentricity e, started at
// apocentre on +x moving in +y (so the pericentre points along -x): at time t the mean anomaly is
// pi + t; Kepler's equation E - e sin E = mean anomaly solved by Newton's method in double.
static void kepler_relative(double e, double t, double r[3], double v[3]) {
  const double mean = M_PI + t;
  double E = mean;
  for (int i = 0; i < 50; ++i) {
    const double f = E - e * std::sin(E) - mean;
    E -= f / (1.0 - e * std::cos(E));
    if (std::fabs(f) < 1e-16) break;
  }
  const double b = std::sqrt(1.0 - e * e);
  const double edot = 1.0 / (1.0 - e * std::cos(E));
  // Perifocal (P, Q) with P = -x, Q = -y.
  r[0] = -(std::cos(E) - e);
  r[1] = -(b * std::sin(E));
  v[0] = std::sin(E) * edot;
  v[1] = -(b * std::cos(E) * edot);
  r[2] = v[2] = 0.0;
}

template <class T>
State<T> binary_at_apocentre(double e) {
  using std::sqrt;
  State<T> s(2);
  s.m[0] = s.m[1] = T(1) / T(2);
  const T ee = T(e);
  const T r = T(1) + ee;
  const T v = sqrt((T(1) - ee) / (T(1) + ee));
  s.x[0] = -r / T(2);
  s.x[3] = r / T(2);
  s.v[1] = -v / T(2);
  s.v[4] = v / T(2);
  return s;
}

// Error of the relative orbit at t against the exact solution (phase-space distance, double).
template <class T>
double kepler_error(const State<T>& s, double e, double t) {
  double r[3], v[3];
  kepler_relative(e, t, r, v);
  double d2 = 0;
  for (int k = 0; k < 3; ++k) {
    const double dr = dbl(s.x[static_cast<std::size_t>(3 + k)] - s.x[static_cast<std::size_t>(k)]) - r[k];
    const double dv = dbl(s.v[static_cast<std::size_t>(3 + k)] - s.v[static_cast<std::size_t>(k)]) - v[k];
    d2 += dr * dr + dv * dv;
  }
  return std::sqrt(d2);
}

// ---------------------------------------------------------------- fixed-step order, chain
// With Options::fixed_step the chain method takes fictitious steps of constant size and
// extrapolates exactly max_order rows: its error must fall as h^(2 rows) (the leapfrog's even
// error expansion, Mikkola & Merritt 2006). Measured on Kepler e = 0.5 through pericentre in dd.
template <class T>
void test_chain_fixed_step_order() {
  const double e = 0.5, t_end = 4.0;  // pericentre at t = pi
  std::printf("  chain fixed_step, Kepler e = 0.5 to t = 4 (exact solution), dd\n");
  for (int rows = 1; rows <= 3; ++rows) {
    double err[3];
    const double h0 = rows == 1 ? 0.02 : rows == 2 ? 0.1 : 0.25;
    for (int i = 0; i < 3; ++i) {
      State<T> s = binary_at_apocentre<T>(e);
      T t = T(0);
      Options o;
      o.fixed_step = h0 / static_cast<double>(1 << i);
      o.max_order = rows;
      const Stats st = integrate(Method::chain, s, t, T(t_end), o);
      check(st.status == Status::success && t == T(t_end), "chain fixed_step run lands on t_end");
      check(st.rejected == 0, "chain fixed_step never rejects");
      err[i] = kepler_error(s, e, t_end);
    }
    const double p1 = std::log2(err[0] / err[1]), p2 = std::log2(err[1] / err[2]);
    std::printf("    rows %d: errors %9.2e %9.2e %9.2e, observed order %.2f %.2f (expected %d)\n", rows, err[0],
                err[1], err[2], p1, p2, 2 * rows);
    check(std::fabs(p2 - 2 * rows) < 0.3, "chain fixed_step order 2 * rows");
  }
}

// The same mode in gbs, through the same dispatch, as a cross-check of the harness.
template <class T>
void test_gbs_fixed_step_order() {
  const double e = 0.5, t_end = 4.0;
  double err[2];
  for (int i = 0; i < 2; ++i) {
    State<T> s = binary_at_apocentre<T>(e);
    T t = T(0);
    Options o;
    o.fixed_step = 0.01 / static_cast<double>(1 << i);
    o.max_order = 2;
    const Stats st = integrate(Method::gbs, s, t, T(t_end), o);
    check(st.status == Status::success && t == T(t_end), "gbs fixed_step run lands on t_end");
    err[i] = kepler_error(s, e, t_end);
  }
  const double p = std::log2(err[0] / err[1]);
  std::printf("  gbs fixed_step rows 2: errors %9.2e %9.2e, observed order %.2f (expected 4)\n", err[0], err[1], p);
  check(std::fabs(p - 4) < 0.3, "gbs fixed_step order 4");
}

// ---------------------------------------------------------------- stop on escape
// A circular binary (m = 1/2 + 1/2, a = 1) at the origin and a third body m3 = 1/10 at distance
// r0 = 5 receding radially at speed v0 = 1.5 (escape speed sqrt(2 M / r0) = 0.66). With
// distance_factor k = 10 the escape test of nbody/escape.hpp holds once the body is beyond
// k a = 10 from the binary's centre of mass. Its time of flight from 5 to 10 in the two-body
// approximation (binary as a point mass, total mass M = 1.1), by Simpson's rule on
// dt = dr / sqrt(v0^2 + 2 M (1/r - 1/r0)).
static double radial_flight_time(double r0, double r1, double v0, double M) {
  const int n = 2000;
  const double h = (r1 - r0) / n;
  double sum = 0;
  for (int i = 0; i <= n; ++i) {
    const double r = r0 + i * h;
    const double f = 1.0 / std::sqrt(v0 * v0 + 2.0 * M * (1.0 / r - 1.0 / r0));
    sum += f * (i == 0 || i == n ? 1 : (i % 2 ? 4 : 2));
  }
  return sum * h / 3.0;
}

template <class T>
State<T> escaping_triple() {
  using std::sqrt;
  State<T> s(3);
  s.m[0] = s.m[1] = T(1) / T(2);
  s.m[2] = T(1) / T(10);
  s.x[0] = T(-1) / T(2);
  s.x[3] = T(1) / T(2);
  const T vc = sqrt(T(1)) / T(2);  // circular, a = 1, M = 1: relative speed 1
  s.v[1] = -vc;
  s.v[4] = vc;
  // Third body on the z axis (perpendicular to the binary plane), receding.
  s.x[8] = T(5);
  s.v[8] = T(3) / T(2);
  return s;
}

// Independent check of the stopped state: the third body is unbound from the binary's centre of
// mass, receding, and farther than 10 binary semimajor axes (computed here from the state).
template <class T>
bool escaped_state(const State<T>& s) {
  double x[9], v[9];
  for (int i = 0; i < 9; ++i) {
    x[i] = dbl(s.x[static_cast<std::size_t>(i)]);
    v[i] = dbl(s.v[static_cast<std::size_t>(i)]);
  }
  const double m0 = 0.5, m1 = 0.5, m2 = 0.1, mb = m0 + m1;
  double R[3], V[3], dr[3], dv[3];
  for (int d = 0; d < 3; ++d) {
    const double cx = (m0 * x[d] + m1 * x[3 + d]) / mb, cv = (m0 * v[d] + m1 * v[3 + d]) / mb;
    R[d] = x[6 + d] - cx;
    V[d] = v[6 + d] - cv;
    dr[d] = x[3 + d] - x[d];
    dv[d] = v[3 + d] - v[d];
  }
  const double rb = std::sqrt(dr[0] * dr[0] + dr[1] * dr[1] + dr[2] * dr[2]);
  const double eb = 0.5 * (dv[0] * dv[0] + dv[1] * dv[1] + dv[2] * dv[2]) - mb / rb;  // per reduced mass
  const double a = -mb / (2.0 * eb);
  const double r = std::sqrt(R[0] * R[0] + R[1] * R[1] + R[2] * R[2]);
  const double e3 = 0.5 * (V[0] * V[0] + V[1] * V[1] + V[2] * V[2]) - (mb + m2) / r;
  const double rv = R[0] * V[0] + R[1] * V[1] + R[2] * V[2];
  return a > 0 && e3 > 0 && rv > 0 && r > 10.0 * a;
}

template <class T>
void test_stop_on_escape(Method method, int pn, const char* name) {
  const double t_cross = radial_flight_time(5.0, 10.0, 1.5, 1.1);
  State<T> s = escaping_triple<T>();
  T t = T(0);
  Options o;
  o.rtol = 1e-12;
  o.stop = StopCondition::escape;
  o.check_every = 1;
  ChainOptions c;
  if (pn) {
    c.pn_orders = pn;
    c.light_speed = {100.0};  // v/c ~ 0.01 in the binary
  }
  const Stats st = integrate(method, s, t, T(100), o, c);
  const double ts = dbl(t);
  std::printf("  %-26s stopped at t = %.4f (radial flight to 10 a: %.4f), body %d, %lld steps\n", name, ts, t_cross,
              st.stop_i, st.steps);
  check(st.status == Status::stop_condition, std::string(name) + ": stops on escape");
  check(st.stopped_by == StopCondition::escape && st.stop_i == 2 && st.stop_j == -1,
        std::string(name) + ": the third body escapes");
  check(escaped_state(s), std::string(name) + ": the stopped state satisfies the escape test");
  // Not before the body crosses 10 a (up to the binary's quadrupole, a few per cent at r = 5), and
  // within one step after it (check_every = 1; the steps here are at most ~1.3 time units).
  check(ts > 0.97 * t_cross && ts < 1.5 * t_cross, std::string(name) + ": stop time near the radial flight time");
}

// The Pythagorean problem: the body of mass 3 (index 0) escapes, after the last close triple
// encounter near t = 60 [memory] (Szebehely & Peters 1967).
template <class T>
void test_pythagorean_escape(Method method, double rtol, const char* name) {
  State<T> s(3);
  const int m[3] = {3, 4, 5};
  const int xy[3][2] = {{1, 3}, {-2, -1}, {1, -1}};
  for (int i = 0; i < 3; ++i) {
    s.m[static_cast<std::size_t>(i)] = T(m[i]);
    s.x[static_cast<std::size_t>(3 * i)] = T(xy[i][0]);
    s.x[static_cast<std::size_t>(3 * i + 1)] = T(xy[i][1]);
  }
  T t = T(0);
  Options o;
  o.rtol = rtol;
  o.stop = StopCondition::escape;
  const Stats st = integrate(method, s, t, T(200), o);
  std::printf("  %-26s stopped at t = %.2f, body %d, %lld steps\n", name, dbl(t), st.stop_i, st.steps);
  check(st.status == Status::stop_condition && st.stop_i == 0, std::string(name) + ": the mass-3 body escapes");
  check(dbl(t) > 60.0 && dbl(t) < 200.0, std::string(name) + ": after the last close encounter");
}

// The batch driver with a stop condition (what a lifetime sweep needs): each system ends where
// its single run ends, bit for bit, with the same stop record; a bound system runs to t_end.
template <class T>
void test_batch_stop(Method method, int threads) {
  const State<T> a = escaping_triple<T>();
  State<T> b = a;
  b.v[8] = T(0);  // the third body at rest at r = 5: falls back, no escape by t_end = 3
  BatchInput<T> in;
  in.count = 2;
  in.n = 3;
  for (const State<T>* s : std::initializer_list<const State<T>*>{&a, &b}) {
    in.m.insert(in.m.end(), s->m.begin(), s->m.end());
    in.x.insert(in.x.end(), s->x.begin(), s->x.end());
    in.v.insert(in.v.end(), s->v.begin(), s->v.end());
  }
  in.t_end = {T(3)};
  BatchSettings set;
  set.options.stop = StopCondition::escape;
  set.options.check_every = 1;
  set.options.distance_factor = 7.0;  // escape beyond 7 a (r0 = 5): met near t = 1.5, before t_end = 3
  set.threads = threads;
  const BatchOutput<T> out = run_batch<T>(BatchTask::integrate, integrator<T>(method), in, set);
  for (int i = 0; i < 2; ++i) {
    State<T> s = i == 0 ? a : b;
    T t = T(0);
    const Stats st = integrate(method, s, t, T(3), set.options);
    bool same = out.t[static_cast<std::size_t>(i)] == t && out.status[static_cast<std::size_t>(i)] == static_cast<int>(st.status);
    for (std::size_t k = 0; k < 9; ++k)
      same = same && out.x[9 * static_cast<std::size_t>(i) + k] == s.x[k] && out.v[9 * static_cast<std::size_t>(i) + k] == s.v[k];
    check(same, std::string("batch stop run ") + std::to_string(i) + " equals the single run bit for bit");
    check(out.stopped_by[static_cast<std::size_t>(i)] == static_cast<int>(st.stopped_by) &&
              out.stop_i[static_cast<std::size_t>(i)] == st.stop_i,
          "batch records the stop condition and body");
  }
  check(out.status[0] == static_cast<int>(Status::stop_condition) && out.stop_i[0] == 2, "batch: system 0 escapes");
  check(out.status[1] == static_cast<int>(Status::success) && out.stop_i[1] == -1, "batch: system 1 runs to t_end");
  std::printf("  batch (%s, %d threads) with stop: t = %.4f (escape), %.1f (bound)\n", method_name(method), threads,
              dbl(out.t[0]), dbl(out.t[1]));
}

// ---------------------------------------------------------------- dispatch and argument check
template <class T>
void test_dispatch_contract() {
  check(method_from_name("gbs") == Method::gbs && method_from_name("chain") == Method::chain, "method names");
  bool threw = false;
  try {
    method_from_name("leapfrog");
  } catch (const std::invalid_argument&) {
    threw = true;
  }
  check(threw, "an unknown method name is refused");
  // Options a method does not read are refused by the dispatch, not dropped.
  State<T> s = binary_at_apocentre<T>(0.5);
  T t = T(0);
  ChainOptions c;
  c.radii = {0.01, 0.01};
  threw = false;
  try {
    integrate(Method::gbs, s, t, T(1), Options(), c);
  } catch (const std::invalid_argument& e) {
    threw = std::string(e.what()).find("radii") != std::string::npos;
  }
  check(threw, "gbs refuses radii by name");
  c = ChainOptions();
  c.pn_orders = pn_1;
  c.light_speed = {100.0};
  threw = false;
  try {
    integrate(Method::gbs, s, t, T(1), Options(), c);
  } catch (const std::invalid_argument& e) {
    threw = std::string(e.what()).find("pn") != std::string::npos;
  }
  check(threw, "gbs refuses post-Newtonian terms by name");
  // The one argument check: the same message from both methods.
  for (Method m : {Method::gbs, Method::chain}) {
    Options o;
    o.max_steps = 0;
    std::string msg;
    try {
      integrate(m, s, t, T(1), o);
    } catch (const std::invalid_argument& e) {
      msg = e.what();
    }
    check(msg.find("max_steps must be >= 1") != std::string::npos, "max_steps checked by every method");
    o = Options();
    o.stop = static_cast<StopCondition>(8);
    msg.clear();
    try {
      integrate(m, s, t, T(1), o);
    } catch (const std::invalid_argument& e) {
      msg = e.what();
    }
    check(msg.find("unknown stop condition") != std::string::npos, "stop checked by every method");
  }
  // The phase-space distance (diagnostics.hpp) against its definition.
  State<T> a(2), b(2);
  a.x[0] = T(3);
  b.v[5] = T(4);
  check(phase_space_distance(a, b) == T(5), "phase-space distance sqrt(3^2 + 4^2) = 5");
}

int main() {
  std::printf("capabilities in both methods\n");
  test_dispatch_contract<double>();
  test_gbs_fixed_step_order<dd>();
  test_chain_fixed_step_order<dd>();
  test_stop_on_escape<double>(Method::gbs, 0, "gbs, Newtonian, f64");
  test_stop_on_escape<double>(Method::chain, 0, "chain, Newtonian, f64");
  test_stop_on_escape<dd>(Method::chain, pn_1 | pn_2 | pn_25, "chain, 1PN+2PN+2.5PN, dd");
  test_batch_stop<double>(Method::chain, 2);
  test_batch_stop<dd>(Method::gbs, 1);
  test_pythagorean_escape<double>(Method::gbs, 1e-13, "pythagorean, gbs, f64");
  test_pythagorean_escape<double>(Method::chain, 1e-13, "pythagorean, chain, f64");
  if (failures) {
    std::printf("FAILED (%d failures)\n", failures);
    return 1;
  }
  std::printf("all capability tests passed\n");
  return 0;
}
