// rate_distortion.cpp — JSON and Markdown forms of a rate–distortion result.
#include "cli/rate_distortion.h"

#include <algorithm>
#include <cstdio>

namespace tessera::cli {

double median_of(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n == 0 ? 0 : n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

double mean_of(std::vector<double> v) {
  double s = 0;
  for (double x : v) s += x;
  return v.empty() ? 0 : s / double(v.size());
}

std::vector<quant::DepthRow> reduce_rows(const std::vector<quant::Ladder>& all, Reduce reduce) {
  if (all.empty()) return {};
  std::vector<quant::DepthRow> out = all.front().depths;
  for (std::size_t d = 0; d < out.size(); ++d) {
    auto field = [&](double quant::DepthRow::*f) {
      std::vector<double> v;
      for (const auto& l : all) v.push_back(l.depths[d].*f);
      out[d].*f = reduce(v);
    };
    for (auto f : {&quant::DepthRow::entropy_kbps, &quant::DepthRow::feature_mel_l1, &quant::DepthRow::feature_mcd_db,
                   &quant::DepthRow::mel_l1, &quant::DepthRow::mcd_db, &quant::DepthRow::spectral_convergence})
      field(f);
  }
  return out;
}

quant::OracleRow reduce_oracle(const std::vector<quant::Ladder>& all, Reduce reduce) {
  quant::OracleRow o;
  for (auto f : {&quant::OracleRow::mel_l1, &quant::OracleRow::mcd_db, &quant::OracleRow::spectral_convergence}) {
    std::vector<double> v;
    for (const auto& l : all) v.push_back(l.oracle.*f);
    o.*f = reduce(v);
  }
  return o;
}

nlohmann::json rate_distortion_json(const std::string& model_id, double frame_rate, int codebook_size,
                                    const std::vector<quant::DepthRow>& depths, const quant::OracleRow& oracle,
                                    const std::vector<quant::StageUsage>& stages,
                                    const std::vector<double>& reencode_agreement) {
  nlohmann::json j = {{"model_id", model_id}, {"frame_rate", frame_rate}, {"codebook_size", codebook_size}};
  j["depths"] = nlohmann::json::array();
  for (const auto& r : depths)
    j["depths"].push_back({{"depth", r.depth}, {"kbps", r.kbps}, {"entropy_kbps", r.entropy_kbps},
                           {"feature_mel_l1", r.feature_mel_l1}, {"feature_mcd_db", r.feature_mcd_db},
                           {"mel_l1", r.mel_l1}, {"mcd_db", r.mcd_db}, {"spectral_convergence", r.spectral_convergence}});
  j["oracle"] = {{"mel_l1", oracle.mel_l1}, {"mcd_db", oracle.mcd_db}, {"spectral_convergence", oracle.spectral_convergence}};
  j["stages"] = nlohmann::json::array();
  for (std::size_t s = 0; s < stages.size(); ++s)
    j["stages"].push_back({{"stage", s + 1}, {"codes_used", stages[s].used}, {"perplexity", stages[s].perplexity},
                           {"dead_share", double(stages[s].unused) / codebook_size},
                           {"entropy_bits", stages[s].entropy_bits}});
  for (std::size_t s = 0; s < stages.size() && s < reencode_agreement.size(); ++s)
    j["stages"][s]["reencode_agreement"] = reencode_agreement[s];
  return j;
}

std::string rate_distortion_table(const std::vector<quant::DepthRow>& depths, const quant::OracleRow& oracle,
                                  const std::vector<quant::StageUsage>& stages, int codebook_size,
                                  const std::vector<double>& reencode_agreement) {
  std::string out =
      "| depth | kbps | entropy kbps | feature L1 | feature MCD dB | audio L1 | audio MCD dB | SC |\n"
      "|---|---|---|---|---|---|---|---|\n";
  char line[256];
  for (const auto& r : depths) {
    std::snprintf(line, sizeof line, "| %d | %.3f | %.3f | %.3f | %.2f | %.3f | %.2f | %.3f |\n", r.depth, r.kbps,
                  r.entropy_kbps, r.feature_mel_l1, r.feature_mcd_db, r.mel_l1, r.mcd_db, r.spectral_convergence);
    out += line;
  }
  std::snprintf(line, sizeof line, "| oracle | – | – | – | – | %.3f | %.2f | %.3f |\n", oracle.mel_l1, oracle.mcd_db,
                oracle.spectral_convergence);
  out += line;
  if (stages.empty()) return out;
  const bool re = reencode_agreement.size() >= stages.size();
  out += re ? "\n| stage | codes used | perplexity | dead share | entropy bits | kept on re-encode |\n|---|---|---|---|---|---|\n"
            : "\n| stage | codes used | perplexity | dead share | entropy bits |\n|---|---|---|---|---|\n";
  for (std::size_t s = 0; s < stages.size(); ++s) {
    std::snprintf(line, sizeof line, "| %zu | %d / %d | %.1f | %.3f | %.2f |", s + 1, stages[s].used, codebook_size,
                  stages[s].perplexity, double(stages[s].unused) / codebook_size, stages[s].entropy_bits);
    out += line;
    if (re) {
      std::snprintf(line, sizeof line, " %.1f%% |", 100 * reencode_agreement[s]);
      out += line;
    }
    out += "\n";
  }
  return out;
}

}  // namespace tessera::cli
