// WriteSynthBatch: many synthetic radiographs on disk, in parallel, each with its truth.
// Output layout (docs/synth.md): <name>.dcm, <name>.truth.json, optional <name>.png,
// truth.jsonl (one record per image, index order) and manifest.json.
#include <algorithm>
#include <atomic>
#include <chrono>
#include <fstream>
#include <mutex>
#include <thread>

#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>

#include "beamtrim/synth.h"

namespace beamtrim {
namespace {

namespace fs = std::filesystem;

struct Outcome {
  std::string line;  // truth JSON line, empty on failure
  nlohmann::json manifest_entry;
  std::optional<Error> error;
};

Status WriteText(const fs::path& file, const std::string& text) {
  std::ofstream out(file, std::ios::binary);
  out << text;
  out.close();
  if (!out) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot write the file");
  return Status::Ok();
}

// 8-bit preview for people: the reader-convention pixels shown as a radiograph (more
// radiation = darker), stretched between the 0.5 and 99.5 percentiles.
Status WritePreview(const SynthImage& img, const fs::path& file) {
  std::vector<float> v(img.pixels.data(), img.pixels.data() + img.pixels.size());
  if (v.empty()) return Status::Ok();
  auto pct = [&v](double q) {
    std::vector<float> c = v;
    size_t k = static_cast<size_t>(q * (c.size() - 1));
    std::nth_element(c.begin(), c.begin() + static_cast<long>(k), c.end());
    return static_cast<double>(c[k]);
  };
  double lo = pct(0.005), hi = std::max(pct(0.995), lo + 1e-6);
  cv::Mat out(img.pixels.height(), img.pixels.width(), CV_8U);
  for (int y = 0; y < out.rows; ++y) {
    for (int x = 0; x < out.cols; ++x) {
      double t = (img.pixels.at(x, y) - lo) / (hi - lo);
      out.at<uint8_t>(y, x) = static_cast<uint8_t>(255.0 * (1.0 - std::clamp(t, 0.0, 1.0)));
    }
  }
  try {
    if (!cv::imwrite(file.string(), out)) throw cv::Exception();
  } catch (const cv::Exception&) {
    return MakeError(ErrorKind::kUnreadable, file.string(), "cannot write the preview");
  }
  return Status::Ok();
}

Outcome MakeOne(const SynthBatchOptions& o, int index) {
  Outcome out;
  SynthScenario sc = o.clinic ? ClinicScenario(o.seed, index, o.image)
                              : RandomScenario(o.seed, index, o.image);
  SynthImage img = Generate(sc);
  const fs::path dcm = o.out_dir / (img.name + ".dcm");
  WriteOptions wo;
  wo.syntax = sc.syntax;
  Status s = WriteRadiograph(img.header, img.stored, dcm, wo);
  if (!s.ok()) {
    out.error = s.error();
    return out;
  }
  std::string json = ToJson(img.truth).dump(2);
  s = WriteText(o.out_dir / (img.name + ".truth.json"), json + "\n");
  if (s.ok() && o.write_png) s = WritePreview(img, o.out_dir / (img.name + ".png"));
  if (!s.ok()) {
    out.error = s.error();
    return out;
  }
  out.line = ToJsonLine(img.truth);
  out.manifest_entry = {{"file", img.name + ".dcm"},
                        {"truth", img.name + ".truth.json"},
                        {"situation", img.situation},
                        {"body_part", img.header.body_part_examined},
                        {"view", img.header.view_position},
                        {"operator", img.header.operators_name},
                        {"station", img.header.station_name},
                        {"study_date", img.header.study_date},
                        {"transfer_syntax", TransferSyntaxName(sc.syntax)},
                        {"presentation_intent", img.header.presentation_intent_type}};
  return out;
}

}  // namespace

SynthBatchResult WriteSynthBatch(const SynthBatchOptions& options,
                                 const std::function<void(int, int)>& progress) {
  SynthBatchResult result;
  std::error_code ec;
  fs::create_directories(options.out_dir, ec);
  if (ec || !fs::is_directory(options.out_dir)) {
    result.errors.push_back(MakeError(ErrorKind::kUnreadable, options.out_dir.string(),
                                      "cannot create the output folder" +
                                          (ec ? ": " + ec.message() : std::string())));
    return result;
  }
  const int n = std::max(0, options.count);
  std::vector<Outcome> outcomes(static_cast<size_t>(n));
  std::atomic<int> next{0}, done{0};
  int threads = options.threads > 0 ? options.threads
                                    : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  threads = std::clamp(threads, 1, std::max(1, n));
  std::vector<std::thread> pool;
  for (int t = 0; t < threads; ++t) {
    pool.emplace_back([&] {
      for (int i = next++; i < n; i = next++) {
        try {
          outcomes[static_cast<size_t>(i)] = MakeOne(options, i);
        } catch (const std::exception& e) {
          outcomes[static_cast<size_t>(i)].error =
              MakeError(ErrorKind::kInternal, "image " + std::to_string(i), e.what());
        }
        ++done;
      }
    });
  }
  int reported = -1;
  while (done.load() < n) {
    if (progress && done.load() != reported) progress(reported = done.load(), n);
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
  }
  for (std::thread& t : pool) t.join();
  if (progress) progress(n, n);

  std::string lines;
  nlohmann::json images = nlohmann::json::array();
  for (const Outcome& o : outcomes) {
    if (o.error) {
      result.errors.push_back(*o.error);
      continue;
    }
    ++result.written;
    lines += o.line + "\n";
    images.push_back(o.manifest_entry);
  }
  nlohmann::json manifest = {
      {"schema", "beamtrim.synth-manifest"},
      {"version", 1},
      {"notice", "Synthetic data: invented images, patients, staff, rooms and institution."},
      {"seed", options.seed},
      {"count", n},
      {"pixel_mm", options.image.pixel_mm},
      {"clinic", options.clinic},
      {"images", images}};
  for (auto [file, text] : {std::pair{"truth.jsonl", lines},
                            std::pair{"manifest.json", manifest.dump(2) + "\n"}}) {
    Status s = WriteText(options.out_dir / file, text);
    if (!s.ok()) result.errors.push_back(s.error());
  }
  return result;
}

}  // namespace beamtrim
