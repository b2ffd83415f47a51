// Cost of the chain method per precision, outside Python: free-fall round trips (integrate to t,
// reverse the velocities, integrate t again) in f64, dd and qd, with the thread CPU time, force
// evaluations, accepted and rejected steps and the round-trip distance of each; the Pythagorean
// problem forward in f64; and the reference loop the costs are expressed in: independent
// double-double multiply-adds (a <- a*b + c, Alg. 12 product then Alg. 6 sum, double_double.hpp).
// Compiled on the fly by benchmarks/speed.py against cpp/include (and, for a before/after
// comparison, against a second header tree) with the engine's flags. Prints JSON.
//
// Usage: chain T_DD T_QD T_F64 x1 y1 [x2 y2 ...]
//   free-fall members (body 3 at (x, y), bodies 1 and 2 at (-1/2, 0) and (1/2, 0), unit masses, at
//   rest); T_DD: the round-trip span in f64 and dd, T_QD: in qd and dd side by side (0 = skip),
//   T_F64: Pythagorean span in f64 (0 = skip). Tolerances: the Python layer's defaults
//   (loschmidt.DEFAULT_TOLERANCE: f64 1e-13, dd 1e-28, qd 1e-56; atol = rtol).
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <string>
#include <vector>

#include <loschmidt/methods/chain.hpp>
#include <loschmidt/scalar/scalar.hpp>

using namespace loschmidt;

static double cpu_now() {  // thread CPU time: a loaded machine steals wall time, not cycles
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

template <class T>
static double tol_of();
template <>
double tol_of<double>() { return 1e-13; }
template <>
double tol_of<dd>() { return 1e-28; }
template <>
double tol_of<qd>() { return 1e-56; }

static int max_rows = 0;  // CHAIN_MAX_ROWS in the environment (0 or unset: the default)

struct Leg {
  double cpu = 0;
  long long evals = 0, steps = 0, rejected = 0;
  bool ok = true;
};

template <class T>
static Leg run(State<T>& s, double span) {
  Options o;
  o.rtol = tol_of<T>();
  o.atol = tol_of<T>();
  o.max_steps = 100000000;
  o.max_order = max_rows;  // 0: the method's default
  T t = T(0);
  const std::vector<T> none;
  const double c0 = cpu_now();
  const Stats st = integrate_chain<T>(s, t, T(span), none, [](int, const T&, const State<T>&) {}, o);
  Leg l;
  l.cpu = cpu_now() - c0;
  l.evals = st.evaluations;
  l.steps = st.steps;
  l.rejected = st.rejected;
  l.ok = st.status == Status::success;
  return l;
}

template <class T>
static State<T> free_fall(double x, double y) {
  State<T> s(3);
  for (int i = 0; i < 3; ++i) s.m[i] = T(1);
  s.x[0] = T(-0.5);
  s.x[3] = T(0.5);
  s.x[6] = T(x);
  s.x[7] = T(y);
  return s;
}

// Round trip: forward, reverse velocities, forward, reverse; distance to the start in double.
template <class T>
static void roundtrip(const char* name, double x, double y, double span, bool last) {
  State<T> s = free_fall<T>(x, y);
  const State<T> s0 = s;
  Leg a = run(s, span);
  for (auto& v : s.v) v = -v;
  Leg b = run(s, span);
  for (auto& v : s.v) v = -v;
  double d2 = 0;
  for (std::size_t i = 0; i < s.x.size(); ++i) {
    const double dx = to_double(s.x[i] - s0.x[i]), dv = to_double(s.v[i] - s0.v[i]);
    d2 += dx * dx + dv * dv;
  }
  std::printf("{\"precision\": \"%s\", \"x\": %.17g, \"y\": %.17g, \"t\": %g, \"cpu\": %.6g, \"evaluations\": %lld, "
              "\"steps\": %lld, \"rejected\": %lld, \"success\": %s, \"delta\": %.6g}%s\n",
              name, x, y, span, a.cpu + b.cpu, a.evals + b.evals, a.steps + b.steps, a.rejected + b.rejected,
              (a.ok && b.ok) ? "true" : "false", std::sqrt(d2), last ? "" : ",");
}

// Independent dd multiply-adds: 8 chains a_i <- a_i * b + c (throughput, as the pair terms of a
// force evaluation are independent). ns per multiply-add.
static inline void clobber() { asm volatile("" ::: "memory"); }
static double dd_madd_ns() {
  dd a[8];
  for (int i = 0; i < 8; ++i) a[i] = dd(1.0 + 0.001 * i) / dd(3.0);
  const dd b = dd(1.0) - dd(1e-9) / dd(7.0), c = dd(1e-9) / dd(11.0);
  const long iters = 400000;
  double best = 1e300;
  for (int r = 0; r < 5; ++r) {
    const double t0 = cpu_now();
    for (long k = 0; k < iters; ++k) {
      for (int i = 0; i < 8; ++i) a[i] = a[i] * b + c;
      clobber();
    }
    const double dt = (cpu_now() - t0) / (8.0 * iters);
    if (dt < best) best = dt;
  }
  volatile double sink = to_double(a[0] + a[7]);
  (void)sink;
  return 1e9 * best;
}

int main(int argc, char** argv) {
  if (argc < 6 || (argc - 4) % 2 != 0) {
    std::fprintf(stderr, "usage: chain T_DD T_QD T_F64 x1 y1 [x2 y2 ...]\n");
    return 2;
  }
  if (const char* e = std::getenv("CHAIN_MAX_ROWS")) max_rows = std::atoi(e);
  const double t_dd = std::atof(argv[1]), t_qd = std::atof(argv[2]), t_f64 = std::atof(argv[3]);
  std::vector<double> pts;
  for (int i = 4; i < argc; ++i) pts.push_back(std::atof(argv[i]));
  const int members = static_cast<int>(pts.size() / 2);
  std::printf("{\"dd_madd_ns\": %.6g,\n\"runs\": [\n", dd_madd_ns());
  bool first = true;
  auto sep = [&]() {
    if (!first) std::printf(",");
    first = false;
  };
  for (int k = 0; k < members; ++k) {
    const double x = pts[2 * k], y = pts[2 * k + 1];
    if (t_dd > 0) {
      sep();
      roundtrip<double>("f64", x, y, t_dd, true);
      sep();
      roundtrip<dd>("dd", x, y, t_dd, true);
    }
    if (t_qd > 0) {
      if (t_qd != t_dd) {
        sep();
        roundtrip<dd>("dd", x, y, t_qd, true);
      }
      sep();
      roundtrip<qd>("qd", x, y, t_qd, true);
    }
  }
  std::printf("],\n\"pythagorean\": ");
  if (t_f64 > 0) {
    State<double> s(3);
    const double px[3][2] = {{1, 3}, {-2, -1}, {1, -1}};
    const double pm[3] = {3, 4, 5};
    for (int i = 0; i < 3; ++i) {
      s.m[i] = pm[i];
      s.x[3 * i] = px[i][0];
      s.x[3 * i + 1] = px[i][1];
    }
    const Leg l = run(s, t_f64);
    std::printf("{\"t\": %g, \"cpu\": %.6g, \"evaluations\": %lld, \"steps\": %lld, \"rejected\": %lld, \"success\": %s}",
                t_f64, l.cpu, l.evals, l.steps, l.rejected, l.ok ? "true" : "false");
  } else {
    std::printf("null");
  }
  std::printf("\n}\n");
  return 0;
}
