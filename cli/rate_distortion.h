// rate_distortion.h — the one JSON schema and table of `ladder` and `evaluate`:
// {"model_id", "frame_rate", "codebook_size",
//  "depths": [{"depth", "kbps", "entropy_kbps", "feature_mel_l1", "feature_mcd_db",
//              "mel_l1", "mcd_db", "spectral_convergence"}],
//  "oracle": {"mel_l1", "mcd_db", "spectral_convergence"},
//  "stages": [{"stage", "codes_used", "perplexity", "dead_share", "entropy_bits",
//              "reencode_agreement"}]}
// reencode_agreement: share of a stage's codes kept when the full-depth decoded log-mel is
// encoded again (left out when not measured).
#pragma once
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "quant/depth_ladder.h"

namespace tessera::cli {

nlohmann::json rate_distortion_json(const std::string& model_id, double frame_rate, int codebook_size,
                                    const std::vector<quant::DepthRow>& depths, const quant::OracleRow& oracle,
                                    const std::vector<quant::StageUsage>& stages,
                                    const std::vector<double>& reencode_agreement = {});

// Summaries over files: field by field over every file's ladder rows (all ladders must
// have the same depths). kbps is copied; entropy_kbps is reduced like the rest, so set it
// from the pooled stage usage when the corpus entropy is wanted.
double mean_of(std::vector<double> v);
double median_of(std::vector<double> v);
using Reduce = double (*)(std::vector<double>);
std::vector<quant::DepthRow> reduce_rows(const std::vector<quant::Ladder>& all, Reduce reduce);
quant::OracleRow reduce_oracle(const std::vector<quant::Ladder>& all, Reduce reduce);

// Markdown tables for people: one row per depth and the oracle, then one per stage.
std::string rate_distortion_table(const std::vector<quant::DepthRow>& depths, const quant::OracleRow& oracle,
                                  const std::vector<quant::StageUsage>& stages, int codebook_size,
                                  const std::vector<double>& reencode_agreement = {});

}  // namespace tessera::cli
