// figures.cpp — medians, spreads, ratios; the table and the JSON object.
#include "cli/bench/figures.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include <nlohmann/json.hpp>

#include "cli/bench/measure.h"

namespace tessera::bench {

void Piece::add(int threads, const std::vector<double>& runs, double peak) {
  auto& v = ms[threads];
  v.insert(v.end(), runs.begin(), runs.end());
  peak_mb[threads] = std::max(peak_mb[threads], peak);
}

namespace {

using nlohmann::json;

// A piece's figure at one thread count: milliseconds as measured, or the real-time factor
// audio_s / time (its min is the slowest run's).
Spread figure(const Piece& p, int threads, double audio_s) {
  const auto it = p.ms.find(threads);
  if (it == p.ms.end()) return {};
  const Spread s = spread_of(it->second);
  if (audio_s <= 0) return s;
  return {audio_s / (s.median / 1e3), audio_s / (s.max / 1e3), audio_s / (s.min / 1e3), s.n};
}

std::string key(int t) { return std::to_string(t); }

double round_to(double v, double step) { return std::round(v / step) * step; }

// {"1": median, ...} and {"1": {"min": .., "max": ..}, ...} of a piece.
void put(json& medians, json& spreads, const Piece& p, const std::vector<int>& threads, double audio_s) {
  medians = json::object(), spreads = json::object();
  for (int t : threads) {
    const Spread s = figure(p, t, audio_s);
    if (s.n == 0) continue;
    medians[key(t)] = round_to(s.median, 0.01);
    spreads[key(t)] = {{"min", round_to(s.min, 0.01)}, {"max", round_to(s.max, 0.01)}, {"runs", s.n}};
  }
}

json peaks(const Piece& p) {
  json j = json::object();
  for (const auto& [t, mb] : p.peak_mb) j[key(t)] = round_to(mb, 0.1);
  return j;
}

json side_json(const Figures& f, const Side& s) {
  json j, spread;
  put(j["train_step_ms"], spread["train_step_ms"], s.train, f.threads, 0);
  put(j["encode_rtf"], spread["encode_rtf"], s.encode, f.threads, s.utterance_s);
  put(j["decode_rtf"], spread["decode_rtf"], s.decode, f.threads, s.utterance_s);
  j["utterance_s"] = s.utterance_s;
  j["spread"] = spread;
  j["peak_mb"] = {{"train_step", peaks(s.train)}, {"encode", peaks(s.encode)}, {"decode", peaks(s.decode)}};
  j["other_load"] = round_to(median_of(s.loads), 0.001);
  return j;
}

}  // namespace

std::string figures_json(const Figures& f) {
  json j = side_json(f, f.tessera);
  j["config"] = f.config;
  j["threads"] = f.threads;
  j["repeats"] = f.repeats, j["warmup"] = f.warmup, j["rounds"] = f.rounds;
  j["train_batch_audio_s"] = f.train_audio_s;
  const Spread r = figure(f.tessera.resynth, 1, f.resynth_s);
  j["resynth_rtf"] = round_to(r.median, 0.01);
  j["resynth_rtf_per_core"] = round_to(r.median, 0.01);  // it runs on one thread
  j["spread"]["resynth_rtf"] = {{"min", round_to(r.min, 0.01)}, {"max", round_to(r.max, 0.01)}, {"runs", r.n}};
  j["peak_mb"]["resynth"] = round_to(f.tessera.resynth.peak_mb.count(1) ? f.tessera.resynth.peak_mb.at(1) : 0, 0.1);
  j["resynth"] = {{"audio_s", f.resynth_s}, {"iterations", f.resynth_iters}, {"method", f.resynth_method}};
  j["encode_1h_peak_mb"] = round_to(f.long_peak_mb, 0.1);
  j["encode_long"] = {{"audio_s", f.long_s}, {"wall_s", round_to(f.long_wall_s, 0.001)},
                      {"rtf", f.long_wall_s > 0 ? round_to(f.long_s / f.long_wall_s, 0.1) : 0.0}};
  // Throughput of each thread count relative to the first one's.
  json scaling = json::object();
  const Spread t0 = figure(f.tessera.train, f.threads.front(), 0);
  for (int t : f.threads)
    if (const Spread s = figure(f.tessera.train, t, 0); s.n && t0.n) scaling[key(t)] = round_to(t0.median / s.median, 0.001);
  j["train_throughput_vs_" + key(f.threads.front()) + "_thread"] = scaling;
  if (!f.peer) {
    j["peer"] = nullptr;
    return j.dump();
  }
  json p = side_json(f, *f.peer);
  p["script"] = f.peer_script;
  p["blas"] = f.peer_blas;
  j["peer"] = p;
  // tessera ÷ peer: time for training (below 1 is faster), real-time factor for the others
  // (above 1 is faster).
  json ratios;
  for (const char* k : {"train_step_ms", "encode_rtf", "decode_rtf"}) {
    ratios[k] = json::object();
    for (auto& [t, v] : j[k].items())
      if (p[k].contains(t) && p[k][t].get<double>() > 0) ratios[k][t] = round_to(v.get<double>() / p[k][t].get<double>(), 0.001);
  }
  j["ratio_to_peer"] = ratios;
  return j.dump();
}

void print_table(const Figures& f) {
  const bool peer = f.peer.has_value();
  std::printf("\n| work | threads | tessera median | min-max | peak MB |%s\n|---|---|---|---|---|%s\n",
              peer ? " peer median | min-max | peak MB | tessera/peer |" : "", peer ? "---|---|---|---|" : "");
  auto row = [&](const char* name, const char* unit, Piece Side::*piece, bool rtf) {
    for (int t : f.threads) {
      const Spread s = figure(f.tessera.*piece, t, rtf ? f.tessera.utterance_s : 0);
      if (s.n == 0) continue;
      std::printf("| %s | %d | %.1f %s | %.1f-%.1f | %.0f |", name, t, s.median, unit, s.min, s.max,
                  (f.tessera.*piece).peak_mb.at(t));
      if (peer) {
        const Spread q = figure((*f.peer).*piece, t, rtf ? f.peer->utterance_s : 0);
        if (q.n)
          std::printf(" %.1f %s | %.1f-%.1f | %.0f | %.2f%s |", q.median, unit, q.min, q.max,
                      ((*f.peer).*piece).peak_mb.at(t), s.median / q.median, rtf ? "x speed" : "x time");
        else
          std::printf(" - | - | - | - |");
      }
      std::printf("\n");
    }
  };
  char name[96];
  std::snprintf(name, sizeof name, "train step (%.0f s of audio)", f.train_audio_s);
  row(name, "ms", &Side::train, false);
  std::snprintf(name, sizeof name, "encode %.0f s, log-mel to codes", f.tessera.utterance_s);
  row(name, "x RT", &Side::encode, true);
  std::snprintf(name, sizeof name, "decode %.0f s, codes to log-mel", f.tessera.utterance_s);
  row(name, "x RT", &Side::decode, true);
  const Spread r = figure(f.tessera.resynth, 1, f.resynth_s);
  std::printf("| resynthesis %.0f s (%s, %d it) | 1 | %.1f x RT | %.1f-%.1f | %.0f |%s\n", f.resynth_s,
              f.resynth_method.c_str(), f.resynth_iters, r.median, r.min, r.max, f.tessera.resynth.peak_mb.at(1),
              peer ? " - | - | - | - |" : "");
  std::printf("| tessera encode of a %.0f s WAV | all | %.1f x RT | - | %.0f |%s\n", f.long_s,
              f.long_wall_s > 0 ? f.long_s / f.long_wall_s : 0.0, f.long_peak_mb, peer ? " - | - | - | - |" : "");
  const Spread t0 = figure(f.tessera.train, f.threads.front(), 0);
  for (std::size_t i = 1; i < f.threads.size(); ++i)
    if (const Spread s = figure(f.tessera.train, f.threads[i], 0); s.n && t0.n)
      std::printf("\ntraining throughput at %d threads: %.2fx that at %d", f.threads[i], t0.median / s.median,
                  f.threads.front());
  std::printf("\nother processes' load while timing (0 idle, 1 every core busy): tessera %.2f", median_of(f.tessera.loads));
  if (peer) std::printf(", peer %.2f (BLAS: %s)", median_of(f.peer->loads), f.peer_blas.c_str());
  std::printf("\nmedian of %d runs per figure (%d round%s of %d after %d warm-up, alternating tessera and peer)\n",
              f.rounds * f.repeats, f.rounds, f.rounds == 1 ? "" : "s", f.repeats, f.warmup);
}

}  // namespace tessera::bench
