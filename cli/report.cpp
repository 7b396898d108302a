// report.cpp — `tessera report --model MODEL IN... -o DIR [--depths 1,2,4,8]`: a listening
// page (DIR/index.html) with players, spectrograms, the rate–distortion curve and codebook
// use, self-contained so that it opens from disk with a double click.
#include <cstdio>
#include <filesystem>
#include <sstream>

#include "audio/atomic_file.h"
#include "audio/audio_io.h"
#include "audio/error.h"
#include "audio/file_list.h"
#include "audio/log_mel.h"
#include "cli/command.h"
#include "cli/file_workers.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "cli/rate_distortion.h"
#include "cli/report/html_page.h"
#include "cli/report/png_writer.h"
#include "cli/report/spectrogram_image.h"
#include "cli/report/svg_chart.h"
#include "quant/checkpoint.h"
#include "quant/depth_ladder.h"

namespace tessera::cli {
namespace fs = std::filesystem;
namespace {

struct ReportArgs {
  std::string model, out, depths;
  std::vector<std::string> inputs;
  int jobs = 0;
};

// "1,2,4,8" → depths within 1..stages; empty → 1, 2, 4, 8, … up to the model's stages
// (always including the full depth).
std::vector<int> parse_depths(const std::string& s, int stages) {
  std::vector<int> d;
  if (s.empty()) {
    for (int x = 1; x < stages; x *= 2) d.push_back(x);
    d.push_back(stages);
    return d;
  }
  std::stringstream ss(s);
  for (std::string t; std::getline(ss, t, ',');) {
    std::size_t used = 0;
    int v = 0;
    try {
      v = std::stoi(t, &used);
    } catch (const std::exception&) {
      used = 0;
    }
    if (used == 0 || used != t.size()) throw Error("--depths '" + s + "': expected a comma-separated list, e.g. 1,2,4");
    if (v < 1 || v > stages)
      throw Error("--depths: depth " + std::to_string(v) + " is outside 1.." + std::to_string(stages) + " (the model's stages)");
    if (!d.empty() && v <= d.back()) throw Error("--depths '" + s + "': list each depth once, in increasing order");
    d.push_back(v);
  }
  return d;
}

std::string fixed(double v, const char* f) {
  char b[32];
  std::snprintf(b, sizeof b, f, v);
  return b;
}

// The model and codebook sections of the resolved YAML: what a reader wants first.
std::string config_excerpt(const std::string& yaml) {
  std::stringstream in(yaml);
  std::string out, line;
  bool keep = false;
  while (std::getline(in, line)) {
    if (!line.empty() && line[0] != ' ' && line[0] != '#') keep = line.rfind("model:", 0) == 0 || line.rfind("codebooks:", 0) == 0;
    if (keep) out += line + "\n";
  }
  return out.empty() ? yaml : out;
}

int run_report(const ReportArgs& a) {
  const std::vector<audio::InputFile> files = audio::expand_inputs(a.inputs);
  if (files.size() > 50)
    throw Error(std::to_string(files.size()) + " inputs: a listening page is for a handful of files (at most 50); "
                "use `tessera evaluate` for a corpus");
  const WorkerPlan plan = plan_workers(a.jobs, files.size() * 4);  // each file is several syntheses
  quant::ModelInfo info;
  const int workers = std::min<int>(plan.workers, int(files.size()));
  const auto models = load_worker_models(a.model, {workers, plan.threads_per_worker},
                                         quant::load_model(a.model, plan.threads_per_worker, &info));
  const quant::ExperimentConfig& cfg = models[0]->config();
  const std::vector<int> depths = parse_depths(a.depths, cfg.codebooks.stages);
  const double* norm = cfg.audio.normalize_input ? &cfg.audio.normalize_dbfs : nullptr;

  std::error_code ec;  // checked before the lock, which would make a file in the input's folder
  for (const auto& f : files)
    if (fs::equivalent(fs::path(f.path).parent_path().empty() ? "." : fs::path(f.path).parent_path(), a.out, ec))
      throw Error("refusing to write the report into '" + a.out + "': it holds the input '" + f.path + "'");
  const FolderLock lock(a.out, "report");  // one writer: two reports into one folder would mix their files
  note_lock_takeover(lock);
  remove_stale_temporaries(a.out, [](const std::string& target) {  // what a killed report left: its own files only
    const std::string name = fs::path(target).filename().string();
    return name == "index.html" || name.rfind("input-", 0) == 0 || fs::path(name).extension() == ".svg";
  });

  const int sr = cfg.audio.sample_rate;
  const double peak = cfg.audio.output_peak_dbfs;
  ReportPage page;
  page.model_path = a.model;
  page.model_id = info.model_id;
  page.frame_rate = cfg.code_rate();
  page.stages = cfg.codebooks.stages;
  page.codes = cfg.codebooks.codes;
  page.steps = info.step;
  page.config_full = info.config_yaml;
  page.config_excerpt = config_excerpt(info.config_yaml);
  page.inputs.resize(files.size());
  std::vector<quant::Ladder> ladders(files.size());
  std::vector<std::vector<std::string>> warnings(files.size());  // odd but usable input (cli/output_path.h)
  quant::UsageStats usage(cfg.codebooks.stages, cfg.codebooks.codes);
  Progress bar("report", double(files.size()), "files/s");
  std::size_t done = 0;

  run_file_workers(
      files.size(), workers,
      [&](std::size_t i, int w) {
        audio::SourceInfo src;
        const audio::Audio in = audio::load_audio_as(files[i].path, sr, norm, &src);
        warnings[i] = input_warnings(src, files[i].path, cfg.audio);
        quant::Ladder lad = quant::depth_ladder(*models[std::size_t(w)], in.samples, depths, /*keep_audio=*/true);
        const std::string stem = "input-" + std::to_string(i + 1);
        ReportInput& ri = page.inputs[i];
        ri.source = files[i].path;
        ri.seconds = lad.seconds;
        // The log-mel of what each player plays, on one scale per input.
        std::vector<std::pair<std::string, const std::vector<float>*>> versions = {{"original", &in.samples},
                                                                                   {"oracle", &lad.oracle_audio}};
        for (std::size_t d = 0; d < depths.size(); ++d)
          versions.push_back({"depth " + std::to_string(depths[d]), &lad.audio[d]});
        std::vector<Eigen::MatrixXf> mels;
        for (const auto& v : versions) mels.push_back(audio::log_mel(cfg.audio, *v.second));
        std::vector<const Eigen::MatrixXf*> ptrs;
        int frames = 0;
        for (const auto& m : mels) ptrs.push_back(&m), frames = std::max(frames, int(m.cols()));
        const DbScale scale = shared_db_scale(ptrs);
        // Short clips are stretched in time (up to 4 px per frame) so that detail shows.
        const int zoom = std::max(1, std::min(4, 640 / std::max(1, frames)));
        ri.display_width = frames * zoom;
        for (std::size_t v = 0; v < versions.size(); ++v) {
          ReportVersion r;
          r.label = versions[v].first;
          std::string tag = r.label;
          for (char& c : tag)
            if (c == ' ') c = '-';
          r.wav = stem + "-" + tag + ".wav";
          r.png = stem + "-" + tag + ".png";
          warn_about_level(audio::save_wav((fs::path(a.out) / r.wav).string(), *versions[v].second, sr,
                                           audio::SampleFormat::pcm16, peak),
                           r.wav);
          const RgbImage img = spectrogram_image(mels[v], frames, scale);
          write_png_rgb((fs::path(a.out) / r.png).string(), img.width, img.height, img.rgb);
          r.png_width = img.width * zoom, r.png_height = img.height;
          if (v == 0) {
            r.kbps = r.mcd_db = r.mel_l1 = "–";
          } else if (v == 1) {
            r.kbps = "–";
            r.mcd_db = fixed(lad.oracle.mcd_db, "%.2f"), r.mel_l1 = fixed(lad.oracle.mel_l1, "%.3f");
          } else {
            const auto& row = lad.depths[v - 2];
            r.kbps = fixed(row.kbps, "%.3f");
            r.mcd_db = fixed(row.mcd_db, "%.2f"), r.mel_l1 = fixed(row.mel_l1, "%.3f");
          }
          if (v == 0) ri.colour_bar_height = img.height;
          ri.versions.push_back(r);
        }
        ri.time_axis_svg = stem + "-time.svg";
        write_file_atomic((fs::path(a.out) / ri.time_axis_svg).string(), time_axis_svg(double(frames) * cfg.audio.hop_length / sr, ri.display_width));
        ri.colour_bar_svg = stem + "-scale.svg";
        write_file_atomic((fs::path(a.out) / ri.colour_bar_svg).string(),
                          colour_bar_svg(scale.lo_db, scale.hi_db, ri.colour_bar_height));
        lad.audio.clear(), lad.oracle_audio.clear();
        ladders[i] = std::move(lad);
      },
      [&](std::size_t i) {
        for (const std::string& m : warnings[i]) bar.message("warning: " + m);
        usage.add_codes(ladders[i].codes);
        bar.update(double(++done));
      });
  bar.finish();

  // Means over the inputs for the curve and the summary table.
  std::vector<CurvePoint> points;
  std::string table = "<table>\n<tr><th>depth</th><th class=\"num\">kbps</th><th class=\"num\">entropy kbps</th>"
                      "<th class=\"num\">feature L1</th><th class=\"num\">feature MCD dB</th><th class=\"num\">audio L1</th>"
                      "<th class=\"num\">audio MCD dB</th><th class=\"num\">SC</th></tr>\n";
  std::vector<quant::StageUsage> stages;
  for (int s = 0; s < cfg.codebooks.stages; ++s) stages.push_back(usage.stage(s));
  std::vector<quant::DepthRow> means = reduce_rows(ladders, mean_of);
  for (auto& m : means) m.entropy_kbps = quant::entropy_kbps(stages, m.depth, cfg.code_rate());
  for (const auto& m : means) {
    points.push_back({m.kbps, m.mcd_db, m.depth});
    table += "<tr><td>" + std::to_string(m.depth) + "</td><td class=\"num\">" + fixed(m.kbps, "%.3f") +
             "</td><td class=\"num\">" + fixed(m.entropy_kbps, "%.3f") + "</td><td class=\"num\">" +
             fixed(m.feature_mel_l1, "%.3f") + "</td><td class=\"num\">" + fixed(m.feature_mcd_db, "%.2f") +
             "</td><td class=\"num\">" + fixed(m.mel_l1, "%.3f") + "</td><td class=\"num\">" + fixed(m.mcd_db, "%.2f") +
             "</td><td class=\"num\">" + fixed(m.spectral_convergence, "%.3f") + "</td></tr>\n";
  }
  const quant::OracleRow o = reduce_oracle(ladders, mean_of);
  table += "<tr><td>oracle</td><td class=\"num\">–</td><td class=\"num\">–</td><td class=\"num\">–</td><td class=\"num\">–"
           "</td><td class=\"num\">" + fixed(o.mel_l1, "%.3f") + "</td><td class=\"num\">" + fixed(o.mcd_db, "%.2f") +
           "</td><td class=\"num\">" + fixed(o.spectral_convergence, "%.3f") + "</td></tr>\n</table>\n";
  page.summary_table_html = table;
  page.rate_distortion_svg = "rate-distortion.svg";
  write_file_atomic((fs::path(a.out) / page.rate_distortion_svg).string(), rate_distortion_svg(points, o.mcd_db));
  std::vector<std::vector<double>> counts;
  for (int s = 0; s < cfg.codebooks.stages; ++s) {
    const auto c = usage.counts(s);
    counts.emplace_back(c.begin(), c.end());
  }
  page.codebook_svg = "codebook-use.svg";
  write_file_atomic((fs::path(a.out) / page.codebook_svg).string(), codebook_use_svg(counts, stages));
  const std::string index = (fs::path(a.out) / "index.html").string();
  write_file_atomic(index, report_html(page));

  std::uintmax_t bytes = 0;
  for (const auto& e : fs::directory_iterator(a.out))
    if (e.is_regular_file()) bytes += e.file_size();
  std::printf("report    %zu inputs at depths", files.size());
  for (int d : depths) std::printf(" %d", d);
  std::printf(" (%.1f s, %.1f MB)\n", bar.elapsed(), double(bytes) / 1e6);
  std::printf("| depth | kbps | audio MCD dB |\n|---|---|---|\n");
  for (const auto& p : points) std::printf("| %d | %.3f | %.2f |\n", p.depth, p.kbps, p.mcd_db);
  std::printf("| oracle | – | %.2f |\n", o.mcd_db);
  std::printf("open      %s\n", fs::absolute(index).lexically_normal().string().c_str());
  return 0;
}

}  // namespace

Run register_report(CLI::App& app) {
  auto a = std::make_shared<ReportArgs>();
  CLI::App* cmd = app.add_subcommand("report", "listening page: players, spectrograms and the rate-distortion curve");
  cmd->add_option("--model", a->model, "model.safetensors")->required()->check(CLI::ExistingFile);
  cmd->add_option("inputs", a->inputs, "a handful of audio files, folders or list files")->required();
  cmd->add_option("-o,--out", a->out, "output folder (index.html and the files it links)")->required();
  cmd->add_option("--depths", a->depths, "depths to show, e.g. 1,2,4,8 (default: 1, 2, 4, ... and the full depth)");
  cmd->add_option("--jobs", a->jobs, "threads (default: all cores)");
  return [a] { return run_report(*a); };
}

}  // namespace tessera::cli
