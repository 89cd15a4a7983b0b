// Test helper: writes a turbulence record, or the shaping filter's PSD, for
// tests/integration/test_turbulence_psd.py.
//
//   aerosect_turbulence_dump record MODEL SIGMA L V DT N SEED [OUT]
//       the record w(k dt), k = 0..N-1 (m/s): to OUT as raw native float64,
//       or to stdout as text, one %.17g value a line;
//   aerosect_turbulence_dump filter-psd MODEL SIGMA L V
//       reads raw native float64 angular frequencies (rad/s) from stdin to
//       its end and writes turbulence_filter_psd at each as raw float64 to
//       stdout.
// MODEL is dryden or von-karman; SIGMA m/s, L m, V m/s, DT s.
// Exit status 0 on success, 2 on bad arguments or an engine error.

#include <cstdint>
#include <cstdio>
#include <exception>
#include <iostream>
#include <stdexcept>
#include <string>
#include <vector>

#include "aerosect/model/turbulence.hpp"

namespace {

aerosect::TurbulenceModel parse_model(const std::string& s) {
  if (s == "dryden") return aerosect::TurbulenceModel::kDryden;
  if (s == "von-karman") return aerosect::TurbulenceModel::kVonKarman;
  throw std::invalid_argument("MODEL must be dryden or von-karman, not " + s);
}

int usage() {
  std::cerr << "usage: aerosect_turbulence_dump record MODEL SIGMA L V DT N SEED [OUT]\n"
               "       aerosect_turbulence_dump filter-psd MODEL SIGMA L V < omegas\n";
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    if (argc < 6) return usage();
    const std::string mode = argv[1];
    aerosect::TurbulenceSpec spec;
    spec.model = parse_model(argv[2]);
    spec.intensity = std::stod(argv[3]);
    spec.scale_length = std::stod(argv[4]);
    spec.airspeed = std::stod(argv[5]);
    if (mode == "record") {
      if (argc != 9 && argc != 10) return usage();
      const double dt = std::stod(argv[6]);
      const auto n = static_cast<std::size_t>(std::stoull(argv[7]));
      spec.seed = static_cast<std::uint64_t>(std::stoull(argv[8]));
      const std::vector<double> w = aerosect::turbulence_record(spec, dt, n);
      if (argc == 10) {
        std::FILE* f = std::fopen(argv[9], "wb");
        if (f == nullptr) throw std::runtime_error(std::string("cannot open ") + argv[9]);
        const std::size_t written = std::fwrite(w.data(), sizeof(double), w.size(), f);
        if (std::fclose(f) != 0 || written != w.size())
          throw std::runtime_error(std::string("cannot write ") + argv[9]);
      } else {
        for (double v : w) std::printf("%.17g\n", v);
      }
      return 0;
    }
    if (mode == "filter-psd") {
      if (argc != 6) return usage();
      double omega = 0;
      while (std::fread(&omega, sizeof omega, 1, stdin) == 1) {
        const double psd = aerosect::turbulence_filter_psd(spec, omega);
        std::fwrite(&psd, sizeof psd, 1, stdout);
      }
      return std::fflush(stdout) == 0 ? 0 : 2;
    }
    return usage();
  } catch (const std::exception& e) {
    std::cerr << "aerosect_turbulence_dump: " << e.what() << "\n";
    return 2;
  }
}
