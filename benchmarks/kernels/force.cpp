// Cost of one force evaluation in the engine's own kernels, outside the integrator: the pairwise
// accelerations of three bodies (the variant the GBS substep uses for each scalar type), and one
// Stormer substep per evaluation (force plus the kick/drift update), for f64, dd and qd in two
// (planar fast path) and three dimensions. Comparing these with the cost per evaluation inside a
// whole integration separates the arithmetic from the tableau and step control. Prints JSON.
// Compiled on the fly by benchmarks/machine.py with the engine's flags (-O3 -ffp-contract=off
// -fno-fast-math, -mfma when the engine was built with it) against cpp/include.
#include <cstdio>
#include <ctime>
#include <type_traits>
#include <vector>

#include <loschmidt/methods/gbs.hpp>
#include <loschmidt/nbody/forces.hpp>
#include <loschmidt/scalar/traits.hpp>

using namespace loschmidt;

static double cpu_now() {  // thread CPU time: a loaded machine steals wall time, not cycles
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

static inline void clobber() { asm volatile("" ::: "memory"); }

template <class T, int D>
static void measure(const char* name, bool last_type, bool last_dim) {
  const int n = 3;
  // The Pythagorean configuration (masses 3, 4, 5; positions (1,3), (-2,-1), (1,-1)), at rest.
  std::vector<T> m = {T(3), T(4), T(5)};
  const double px[3][3] = {{1, 3, 0}, {-2, -1, 0}, {1, -1, 0}};
  std::vector<T> x(D * n), a(D * n);
  for (int i = 0; i < n; ++i)
    for (int c = 0; c < D; ++c) x[D * i + c] = T(px[i][c] + (c == 2 ? 0.25 * i : 0.0));
  PairWorkspace<T> w;
  w.setup(n);
  auto force = [&]() {
    if constexpr (std::is_same_v<T, double>) accelerations_in<D>(n, m.data(), x.data(), a.data());
    else accelerations_in<D>(n, m.data(), x.data(), a.data(), w);
  };
  const long calls = std::is_same_v<T, qd> ? 8000 : (std::is_same_v<T, dd> ? 100000 : 1000000);
  double best_force = 1e300;
  for (int r = 0; r < 3; ++r) {
    const double t0 = cpu_now();
    for (long k = 0; k < calls; ++k) {
      force();
      clobber();
    }
    const double dt = (cpu_now() - t0) / calls;
    if (dt < best_force) best_force = dt;
  }
  // One Stormer substep per evaluation: y = (x, v), 8 substeps over a short macro step.
  std::vector<T> y(2 * D * n, T(0)), dy(2 * D * n);
  for (int i = 0; i < D * n; ++i) y[i] = x[i];
  NewtonianStormerSubstep<T, D> sub;
  sub.setup(n, m.data());
  sub.begin(y.data());
  const int nsub = 8;
  const T H = T(1) / T(1024);
  const long incs = calls / nsub;
  double best_sub = 1e300;
  for (int r = 0; r < 3; ++r) {
    const double t0 = cpu_now();
    for (long k = 0; k < incs; ++k) {
      sub.increment(y.data(), H, nsub, dy.data());
      clobber();
    }
    const double dt = (cpu_now() - t0) / (incs * nsub);
    if (dt < best_sub) best_sub = dt;
  }
  if (D == 2) std::printf("  \"%s\": {", name);
  std::printf("\"D%d\": {\"force_ns\": %.6g, \"substep_ns\": %.6g}%s", D, 1e9 * best_force, 1e9 * best_sub,
              last_dim ? (last_type ? "}\n" : "},\n") : ", ");
}

// Cost of single operations: four independent chains of the same operation (so neither pure
// latency nor an unrealistic throughput), ns per operation.
template <class T, class Op>
static double op_ns(Op op, long iters) {
  T v[4] = {T(1.25), T(1.5), T(1.75), T(2.0)};
  const T c = T(1) + T(1) / T(3) * T(1e-9);
  double best = 1e300;
  for (int r = 0; r < 3; ++r) {
    const double t0 = cpu_now();
    for (long k = 0; k < iters; ++k) {
      for (int i = 0; i < 4; ++i) v[i] = op(v[i], c);
      clobber();
    }
    const double dt = (cpu_now() - t0) / (4.0 * iters);
    if (dt < best) best = dt;
  }
  volatile double sink = to_double(v[0] + v[1] + v[2] + v[3]);
  (void)sink;
  return 1e9 * best;
}

template <class T>
static void ops(const char* name, long iters, bool last) {
  using std::sqrt;
  std::printf("  \"%s\": {\"add_ns\": %.4g, \"mul_ns\": %.4g, \"div_ns\": %.4g, \"sqrt_ns\": %.4g}%s\n", name,
              op_ns<T>([](const T& a, const T& b) { return a + b - T(1); }, iters) / 2,  // two adds
              op_ns<T>([](const T& a, const T& b) { return a * b; }, iters),
              op_ns<T>([](const T& a, const T& b) { return a / b; }, iters),
              op_ns<T>([](const T& a, const T&) { return sqrt(a) + T(1); }, iters) , last ? "" : ",");
}

int main() {
  std::printf("{\n");
  measure<double, 2>("f64", false, false);
  measure<double, 3>("f64", false, true);
  measure<dd, 2>("dd", false, false);
  measure<dd, 3>("dd", false, true);
  measure<qd, 2>("qd", true, false);
  measure<qd, 3>("qd", false, true);
  std::printf("  \"ops\": {\n");
  ops<double>("f64", 2000000, false);
  ops<dd>("dd", 200000, false);
  ops<qd>("qd", 20000, true);
  std::printf("  }\n}\n");
  return 0;
}
