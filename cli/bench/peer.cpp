// peer.cpp — the peer's command line, environment and JSON line.
#include "cli/bench/peer.h"

#include <cstdlib>
#include <filesystem>

#include <nlohmann/json.hpp>

#include "audio/error.h"
#include "cli/bench/child.h"

namespace tessera::bench {

namespace {
// Where Debian's libopenblas0-openmp puts its libblas.so.3 (multiarch layout of x86-64
// and arm64 Debian); empty when not installed.
std::string openblas_openmp_dir() {
  for (const char* d : {"/usr/lib/x86_64-linux-gnu/openblas-openmp", "/usr/lib/aarch64-linux-gnu/openblas-openmp"})
    if (std::filesystem::exists(std::filesystem::path(d) / "libblas.so.3")) return d;
  return "";
}
}  // namespace

Peer::Peer(std::string script) : script_(std::move(script)) {
  if (script_.empty())
    if (const char* e = std::getenv("TESSERA_PEER")) script_ = e;
  if (script_.empty()) return;
  if (!std::filesystem::is_regular_file(script_)) throw Error("peer script '" + script_ + "' is not a file");
  // Debian's python3-torch serves the system interpreter, which a python3 earlier on PATH
  // (a virtual environment, pyenv) may hide.
  const char* py = std::getenv("TESSERA_PEER_PYTHON");
  python_ = py && *py ? py : std::filesystem::exists("/usr/bin/python3") ? "/usr/bin/python3" : "python3";
  const std::string blas = openblas_openmp_dir();
  if (!blas.empty()) {
    const char* old = std::getenv("LD_LIBRARY_PATH");
    env_.push_back("LD_LIBRARY_PATH=" + blas + (old && *old ? ":" + std::string(old) : ""));
  }
}

PeerRun Peer::run(const std::string& mode, int threads, int repeats, int warmup,
                  const std::vector<std::string>& shape) const {
  std::vector<std::string> argv = {python_, "-u", script_, "--mode", mode, "--threads", std::to_string(threads),
                                   "--repeats", std::to_string(repeats), "--warmup", std::to_string(warmup)};
  argv.insert(argv.end(), shape.begin(), shape.end());
  const ChildResult c = run_program(argv, env_);
  const std::string what = "peer '" + script_ + "' --mode " + mode + " --threads " + std::to_string(threads);
  if (c.exit_code != 0) {
    const std::string tail = c.output.substr(c.output.size() > 400 ? c.output.size() - 400 : 0);
    throw Error(what + " failed with exit code " + std::to_string(c.exit_code) + " (" + python_ + "): " + tail);
  }
  // Its result is the last line that starts an object.
  const auto start = c.output.rfind("\n{");
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(c.output.substr(start == std::string::npos ? 0 : start + 1));
  } catch (const std::exception&) {
    throw Error(what + " printed no JSON line");
  }
  PeerRun r;
  r.peak_mb = c.peak_mb;
  try {
    const auto& ms = mode == "train" ? j.at("ms_per_step") : j.at("ms");
    for (const auto& v : ms.at("all")) r.ms.push_back(v.get<double>());
    r.audio_s = mode == "train" ? j.at("audio_s_per_step").get<double>() : j.at("audio_s").get<double>();
    if (j.contains("other_process_cpu_fraction") && j["other_process_cpu_fraction"].is_number())
      r.other_load = j["other_process_cpu_fraction"].get<double>();
    if (j.contains("blas_libs"))
      for (const auto& b : j["blas_libs"])
        r.blas += (r.blas.empty() ? "" : ",") + std::filesystem::path(b.get<std::string>()).filename().string();
  } catch (const std::exception& e) {
    throw Error(what + ": unexpected JSON (" + std::string(e.what()) + ")");
  }
  if (r.ms.empty()) throw Error(what + ": no timings in its JSON line");
  return r;
}

}  // namespace tessera::bench
