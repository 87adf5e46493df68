// Progress output for people: a bar on terminals, plain periodic lines elsewhere, a summary.
#include <cmath>
#include <cstdio>
#include <sstream>

#include "beamtrim/scan.h"

namespace beamtrim {
namespace {

class SteadyClock : public Clock {
 public:
  std::chrono::steady_clock::time_point Now() const override {
    return std::chrono::steady_clock::now();
  }
};

std::string Fixed(double value, int decimals) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*f", decimals, value);
  return text;
}

constexpr auto kBarRedraw = std::chrono::milliseconds(100);

}  // namespace

const Clock& SystemClock() {
  static const SteadyClock clock;
  return clock;
}

std::string FormatDuration(double seconds) {
  if (!std::isfinite(seconds) || seconds < 0) return "--";
  auto total = static_cast<long long>(std::llround(seconds));
  long long h = total / 3600, m = (total / 60) % 60, s = total % 60;
  char text[64];
  if (h > 0) {
    std::snprintf(text, sizeof text, "%lldh%02lldm", h, m);
  } else if (m > 0) {
    std::snprintf(text, sizeof text, "%lldm%02llds", m, s);
  } else {
    std::snprintf(text, sizeof text, "%llds", s);
  }
  return text;
}

std::string FormatSummary(const ScanSummary& s) {
  std::ostringstream out;
  int64_t handled = s.already_stored + s.ok + s.skipped + s.failed;
  double rate = s.seconds > 0 ? handled / s.seconds : 0.0;
  out << "scan " << (s.store_error ? "ended early" : s.stopped ? "stopped" : "finished") << ": "
      << handled << " of " << s.files << " files in " << FormatDuration(s.seconds) << " ("
      << Fixed(rate, 1) << " files/s)\n";
  out << "  measured now: " << s.ok << " ok, " << s.skipped << " skipped, " << s.failed
      << " failed";
  if (s.duplicates) out << " (" << s.duplicates << " duplicate SOP instances noted, not stored twice)";
  out << "\n  already stored by an earlier run: " << s.already_stored;
  if (s.not_stored) out << "\n  measured but not stored (run again to resume): " << s.not_stored;
  if (!s.reasons.empty()) {
    out << "\n  reasons for skipped and failed files:";
    for (const auto& [reason, count] : s.reasons) out << "\n    " << count << " x " << reason;
  }
  if (!s.problems.empty()) {
    out << "\n  inputs that could not be read: " << s.problems.size();
    for (const Error& e : s.problems) out << "\n    " << e.ToString();
  }
  if (s.store_error) out << "\n  store: " << s.store_error->ToString();
  if (s.stopped || s.store_error) {
    out << "\n  run the same command again to measure the rest: what is stored is kept and "
           "skipped";
  }
  return out.str();
}

ConsoleProgress::ConsoleProgress(std::ostream& out, bool terminal, const Clock& clock,
                                 std::chrono::milliseconds plain_interval)
    : out_(out), terminal_(terminal), clock_(clock), plain_interval_(plain_interval) {}

void ConsoleProgress::OnStart(int64_t total_files) {
  start_ = last_draw_ = clock_.Now();
  out_ << "scan: " << total_files << " files to check\n";
  out_.flush();
}

void ConsoleProgress::ClearBar() {
  if (terminal_ && bar_visible_) out_ << "\r\033[K";
  bar_visible_ = false;
}

void ConsoleProgress::OnProblem(const Error& problem) {
  ClearBar();
  out_ << "warning: " << problem.ToString() << "\n";
  out_.flush();
}

void ConsoleProgress::OnFile(const ScanEvent& event, int64_t done, int64_t total) {
  if (event.status == RecordStatus::kError && !event.already_stored) {
    if (errors_printed_ < max_error_lines) {
      ClearBar();
      out_ << "error: " << event.reason << "\n";
    } else if (errors_printed_ == max_error_lines) {
      ClearBar();
      out_ << "error: more failed files; the summary counts every reason\n";
    }
    ++errors_printed_;
  }
  auto now = clock_.Now();
  auto interval = terminal_ ? std::chrono::duration_cast<std::chrono::milliseconds>(kBarRedraw)
                            : plain_interval_;
  if (now - last_draw_ >= interval || (terminal_ && done == total)) {
    last_draw_ = now;
    Draw(done, total, false);
  }
}

void ConsoleProgress::Draw(int64_t done, int64_t total, bool final_line) {
  double elapsed = std::chrono::duration<double>(clock_.Now() - start_).count();
  double rate = elapsed > 0 ? done / elapsed : 0.0;
  double left = rate > 0 ? (total - done) / rate : -1.0;
  double fraction = total > 0 ? static_cast<double>(done) / total : 1.0;
  if (terminal_) {
    constexpr int kWidth = 30;
    int filled = static_cast<int>(fraction * kWidth);
    out_ << "\r\033[K[" << std::string(filled, '#') << std::string(kWidth - filled, '.') << "] "
         << done << "/" << total << "  " << Fixed(rate, 1) << "/s  " << FormatDuration(left)
         << " left";
    bar_visible_ = true;
  } else {
    out_ << "scan: " << done << "/" << total << " files (" << Fixed(100.0 * fraction, 1)
         << " %), " << Fixed(rate, 1) << " files/s, about " << FormatDuration(left) << " left\n";
  }
  if (final_line) out_ << "\n";
  out_.flush();
}

void ConsoleProgress::OnFinish(const ScanSummary& summary) {
  if (bar_visible_) out_ << "\n";
  bar_visible_ = false;
  out_ << FormatSummary(summary) << "\n";
  out_.flush();
}

}  // namespace beamtrim
