// peer.h — runs the PyTorch peer (a torch_reference.py-style script printing one JSON line
// per run) as a child process and reads its timings.
//   python -u SCRIPT --mode train|encode|decode --threads N --repeats R --warmup W
//                    --batch B --frames T --utt-frames N   (the same shapes as tessera's)
// The interpreter is $TESSERA_PEER_PYTHON, else the system's /usr/bin/python3 (where
// Debian's python3-torch lives), else python3 on PATH; when Debian's OpenMP build of
// OpenBLAS is installed (package libopenblas0-openmp), it is put first on
// LD_LIBRARY_PATH, as the peer's README asks (the reference BLAS is 3–6× slower).
#pragma once
#include <string>
#include <vector>

namespace tessera::bench {

struct PeerRun {
  std::vector<double> ms;   // every timed repeat
  double audio_s = 0;       // audio per run (encode, decode) or per step (train)
  double other_load = -1;   // the peer's other_process_cpu_fraction
  double peak_mb = 0;       // the peer process's ru_maxrss
  std::string blas;         // BLAS libraries the peer loaded, comma-separated
};

class Peer {
 public:
  // script empty: $TESSERA_PEER; still empty → not available.
  explicit Peer(std::string script);
  bool available() const { return !script_.empty(); }
  const std::string& script() const { return script_; }
  // Throws tessera::Error naming the script when it fails or prints no JSON.
  // `shape`: the shape arguments, e.g. {"--batch", "16", "--frames", "200"}.
  PeerRun run(const std::string& mode, int threads, int repeats, int warmup,
              const std::vector<std::string>& shape) const;

 private:
  std::string script_, python_;
  std::vector<std::string> env_;
};

}  // namespace tessera::bench
