// Speed and memory of `taut modal` on the size issue 3 sets: 300 s of
// 3 channels at 512 Hz (153,600 rows), an invented tie with four modes.
// Targets: CSV read < 150 ms; FDD + SSI-COV (orders 2..40, stabilisation,
// segment uncertainty) < 60 ms; peak heap < 10 x the samples as float64.
//
// Run: build/bench/bench_modal   (medians of 7 repetitions are printed)
//
// Heap accounting: malloc/free (and friends) are wrapped around glibc's
// __libc_* entry points so that every allocation is counted, including
// Eigen's (which calls malloc directly, bypassing operator new). The
// counters report the peak heap growth over the state before the measured
// call, divided by the 3.7 MB of samples.
#include <benchmark/benchmark.h>
#include <malloc.h>
#include <unistd.h>

#include <atomic>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <random>

#include "estimation/conditioning.h"
#include "estimation/fdd.h"
#include "estimation/modal_id.h"
#include "estimation/record.h"
#include "estimation/spectral.h"
#include "estimation/ssi_cov.h"

extern "C" {
void* __libc_malloc(size_t);
void __libc_free(void*);
void* __libc_calloc(size_t, size_t);
void* __libc_realloc(void*, size_t);
void* __libc_memalign(size_t, size_t);
}

namespace {
std::atomic<long long> g_current{0};
std::atomic<long long> g_peak{0};
void Add(void* p) {
  if (!p) return;
  const long long now = g_current += static_cast<long long>(malloc_usable_size(p));
  long long peak = g_peak.load();
  while (now > peak && !g_peak.compare_exchange_weak(peak, now)) {
  }
}
void Sub(void* p) {
  if (p) g_current -= static_cast<long long>(malloc_usable_size(p));
}
}  // namespace

extern "C" {
void* malloc(size_t n) {
  void* p = __libc_malloc(n);
  Add(p);
  return p;
}
void free(void* p) {
  Sub(p);
  __libc_free(p);
}
void* calloc(size_t a, size_t b) {
  void* p = __libc_calloc(a, b);
  Add(p);
  return p;
}
void* realloc(void* p, size_t n) {
  Sub(p);
  void* q = __libc_realloc(p, n);
  if (q) {
    Add(q);
  } else if (p && n != 0) {
    Add(p);  // failed: the old block is still live
  }
  return q;
}
void* memalign(size_t a, size_t n) {
  void* p = __libc_memalign(a, n);
  Add(p);
  return p;
}
void* aligned_alloc(size_t a, size_t n) { return memalign(a, n); }
int posix_memalign(void** out, size_t a, size_t n) {
  void* p = memalign(a, n);
  if (!p) return 12;  // ENOMEM
  *out = p;
  return 0;
}
}

namespace {

constexpr double kFs = 512.0;
constexpr double kDuration_s = 300.0;
constexpr int kChannels = 3;

// Sensor positions as shares of the span (no sensor at a node of modes 1-4).
constexpr double kSensorAt[kChannels] = {0.2, 0.45, 0.7};

// Four modes of an invented 6 m tie (pinned-like shapes at the sensors),
// each a resonator driven by white noise (2nd-order recursion with the
// exact pole pair exp(lambda dt)), plus 2 % sensor noise.
const std::string& CsvPath() {
  static const std::string path = [] {
    const std::string p =
        (std::filesystem::temp_directory_path() / ("taut_bench_modal_" + std::to_string(::getpid()) + ".csv"))
            .string();
    const int n = static_cast<int>(kDuration_s * kFs);
    const double f[4] = {6.1, 12.9, 20.8, 30.2};
    const double zeta = 0.005;
    std::mt19937_64 rng(1);
    std::normal_distribution<double> g(0.0, 1.0);
    std::vector<double> y(static_cast<std::size_t>(n) * kChannels, 0.0);
    for (int r = 0; r < 4; ++r) {
      const double w = 2 * M_PI * f[r];
      const double rad = std::exp(-zeta * w / kFs);
      const double c = 2 * rad * std::cos(w * std::sqrt(1 - zeta * zeta) / kFs);
      double q1 = 0, q2 = 0;
      for (int k = 0; k < n; ++k) {
        const double q = c * q1 - rad * rad * q2 + g(rng);
        q2 = q1;
        q1 = q;
        for (int s = 0; s < kChannels; ++s)
          y[static_cast<std::size_t>(k) * kChannels + s] += q * std::sin((r + 1) * M_PI * kSensorAt[s]);
      }
    }
    std::FILE* fo = std::fopen(p.c_str(), "w");
    std::fprintf(fo, "# recorded_at=2026-11-20T10:00:00Z\n# units=m/s2\ntime_s,a1,a2,a3\n");
    for (int k = 0; k < n; ++k) {
      std::fprintf(fo, "%.6f", k / kFs);
      for (int s = 0; s < kChannels; ++s)
        std::fprintf(fo, ",%.6g", y[static_cast<std::size_t>(k) * kChannels + s] * (1 + 0.02 * g(rng)));
      std::fprintf(fo, "\n");
    }
    std::fclose(fo);
    // The path outlives static destruction (atexit handlers registered
    // during the static's construction run after its destructor).
    static const char* to_remove = strdup(p.c_str());
    std::atexit([] { std::remove(to_remove); });
    return p;
  }();
  return path;
}

constexpr double kSampleBytes = kDuration_s * kFs * kChannels * sizeof(double);

void BM_ReadCsv(benchmark::State& state) {
  const std::string& path = CsvPath();
  double ratio = 0;
  for (auto _ : state) {
    taut::estimation::Record r;
    const long long base = g_current.load();
    g_peak = base;
    taut::Status s = taut::estimation::ReadRecordCsv(path, {}, &r);
    ratio = (g_peak.load() - base) / kSampleBytes;
    if (!s.ok()) state.SkipWithError(s.message.c_str());
    benchmark::DoNotOptimize(r.samples.data());
  }
  state.counters["peak_heap_over_samples"] = ratio;
  state.counters["file_MB"] = static_cast<double>(std::filesystem::file_size(path)) / 1e6;
}
BENCHMARK(BM_ReadCsv)->Unit(benchmark::kMillisecond)->Repetitions(7)->ReportAggregatesOnly(true);

// The same record in a logger dialect (docs/FORMATS.md section 2.1):
// semicolons, decimal commas, time in milliseconds, a line of logger text
// above the header, CRLF. Compare its median with BM_ReadCsv's in one run.
const std::string& DialectCsvPath() {
  static const std::string path = [] {
    std::ifstream in(CsvPath());
    const std::string p = CsvPath() + ".dialect.csv";
    std::ofstream out(p, std::ios::binary);
    out << "Invented logger LX-2 export\r\n";
    std::string line;
    bool header = false;
    while (std::getline(in, line)) {
      if (line.rfind("time_s", 0) == 0) {
        out << "time_ms;a1;a2;a3\r\n";
        header = true;
        continue;
      }
      if (header) {
        const std::size_t comma = line.find(',');
        char ms[32];
        std::snprintf(ms, sizeof ms, "%.3f", std::strtod(line.substr(0, comma).c_str(), nullptr) * 1000.0);
        line = ms + line.substr(comma);
        for (char& c : line) c = c == ',' ? ';' : c == '.' ? ',' : c;
      }
      out << line << "\r\n";
    }
    static const char* to_remove = strdup(p.c_str());
    std::atexit([] { std::remove(to_remove); });
    return p;
  }();
  return path;
}

void BM_ReadCsvDialect(benchmark::State& state) {
  const std::string& path = DialectCsvPath();
  for (auto _ : state) {
    taut::estimation::Record r;
    taut::Status s = taut::estimation::ReadRecordCsv(path, {}, &r);
    if (!s.ok()) state.SkipWithError(s.message.c_str());
    benchmark::DoNotOptimize(r.samples.data());
  }
}
BENCHMARK(BM_ReadCsvDialect)->Unit(benchmark::kMillisecond)->Repetitions(7)->ReportAggregatesOnly(true);

void BM_IdentifyModes(benchmark::State& state) {
  taut::estimation::Record r;
  if (!taut::estimation::ReadRecordCsv(CsvPath(), {}, &r).ok()) {
    state.SkipWithError("read failed");
    return;
  }
  double ratio = 0;
  std::size_t modes = 0;
  for (auto _ : state) {
    taut::estimation::ModalIdentification id;
    const long long base = g_current.load();
    g_peak = base;
    taut::Status s = taut::estimation::IdentifyModes(r, {}, &id);
    ratio = (g_peak.load() - base) / kSampleBytes;
    if (!s.ok()) state.SkipWithError(s.message.c_str());
    modes = id.modes.size();
  }
  state.counters["peak_heap_over_samples"] = ratio;
  state.counters["modes"] = static_cast<double>(modes);
}
BENCHMARK(BM_IdentifyModes)->Unit(benchmark::kMillisecond)->Repetitions(7)->ReportAggregatesOnly(true);

// The stages of IdentifyModes on the same record, for the breakdown.
void BM_Stages(benchmark::State& state) {
  using namespace taut::estimation;
  Record r;
  if (!ReadRecordCsv(CsvPath(), {}, &r).ok()) {
    state.SkipWithError("read failed");
    return;
  }
  Eigen::MatrixXd y = r.samples;
  RemoveLinearTrend(&y);
  const int stage = static_cast<int>(state.range(0));
  CrossSpectrum csd;
  WelchCsd(y, kFs, {}, &csd);
  Eigen::MatrixXd yd;
  Decimate(y, 5, &yd);
  for (auto _ : state) {
    if (stage == 0) {
      WelchCsd(y, kFs, {}, &csd);
    } else if (stage == 1) {
      benchmark::DoNotOptimize(RunFdd(csd, 0.0, 200.0, 16));
    } else if (stage == 2) {
      Decimate(y, 5, &yd);
    } else {
      SsiOptions so;
      so.lowest_hz = 4.9;
      so.hi_hz = 40.0;
      SsiResult res;
      RunSsiCov(yd, kFs / 5, so, &res);
    }
  }
}
BENCHMARK(BM_Stages)->Arg(0)->Arg(1)->Arg(2)->Arg(3)->Unit(benchmark::kMillisecond);

}  // namespace
