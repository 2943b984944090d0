// ogive-demo-solver: the demo's objective program, run by `ogive work` once per trial. It reads the
// candidate from OGIVE_* environment variables, "runs" a simulated flow solver (sleeps a random short
// time), and prints the simulated wall time in minutes as its last line. Now and then it crashes, as
// real jobs do. The model is invented for the demo.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <string>
#include <thread>

namespace {

std::string Env(const char* name) {
  const char* v = std::getenv(name);
  if (v == nullptr) {
    std::fprintf(stderr, "ogive-demo-solver: %s is not set (run me under `ogive work`)\n", name);
    std::exit(2);
  }
  return v;
}

}  // namespace

int main() {
  const double relaxation = std::atof(Env("OGIVE_RELAXATION").c_str());
  const double tolerance = std::atof(Env("OGIVE_TOLERANCE").c_str());
  const int mesh = std::atoi(Env("OGIVE_MESH_LEVEL").c_str());
  const std::string preconditioner = Env("OGIVE_PRECONDITIONER");
  const bool reorder = Env("OGIVE_REORDER") == "1";
  std::mt19937_64 rng(std::random_device{}());
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  // A run takes 50..400 ms of real time.
  std::this_thread::sleep_for(std::chrono::milliseconds(50 + static_cast<int>(350 * uniform(rng))));
  if (uniform(rng) < 0.04) {
    std::fprintf(stderr, "ogive-demo-solver: simulated crash (segmentation fault in the mesher)\n");
    std::abort();
  }
  double iterations = 40.0 * (1.0 + 8.0 * std::pow(relaxation - 1.62, 2)) * (1.0 + 0.08 * -std::log10(tolerance));
  if (preconditioner == "ilu") iterations *= 0.55;
  if (preconditioner == "amg") iterations *= 0.35;
  const double per_iteration =
      0.02 * std::pow(1.7, mesh) * (reorder ? 0.8 : 1.0) * (preconditioner == "amg" ? 1.3 : 1.0);
  const double rerun = mesh < 4 ? 25.0 * (4 - mesh) : 0.0;
  const double accuracy_penalty = tolerance > 1e-6 ? 30.0 * std::log10(tolerance / 1e-6) : 0.0;
  std::printf("solver converged in %.0f iterations\n", iterations);
  std::printf("%.4f\n", iterations * per_iteration + rerun + accuracy_penalty + 0.05 * (uniform(rng) - 0.5));
  return 0;
}
