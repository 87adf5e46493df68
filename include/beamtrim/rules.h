// Verdict rules: per body part and view, how much exposed field beyond the anatomy is
// acceptable, whether all collimation borders must be visible and how many blade edges the
// anatomy may run into. Loaded from a JSON rules file (docs/rules.md); the shipped defaults are
// "common practice, no single source". A RuleSet is immutable after loading and safe to share
// between threads; Find() returns a reference owned by the RuleSet.
#pragma once

#include <array>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/status.h"

namespace beamtrim {

inline constexpr const char* kRulesSchema = "beamtrim.rules";
inline constexpr int kRulesVersion = 1;

// Which blade edges the patient's body is expected to run through for an exam, so that
// anatomy at those edges is a continuation, not a cut-off (docs/method.md, "Clipping"). The
// ends are the two field sides across the long axis of the body or limb.
enum class Continuation {
  kNone,      // anatomy at any blade edge is a likely cut-off ("none")
  kOneEnd,    // the limb or the neck runs through one end (hand, foot, skull: "one end")
  kBothEnds,  // the limb or trunk runs through both ends (knee, forearm: "both ends")
  kAllSides,  // the field normally lies within the body (chest, abdomen, spine: "all sides")
};
const char* ContinuationName(Continuation c);  // the rules-file spelling, e.g. "both ends"

struct Rule {
  std::string name;                     // shown in the verdict ("hand", "default")
  std::vector<std::string> body_parts;  // Body Part Examined values, upper case; empty = any
  std::vector<std::string> views;       // View Position values, upper case; empty = any
  double margin_mm = 10.0;              // allowed margin around the anatomy box, image plane
  double max_excess_fraction = 0.30;    // of the field, outside the box plus the margin
  bool require_all_borders = true;      // every blade edge must be visible on the image
  int clipped_sides_allowed = 0;        // cut-off blade edges tolerated (0..4)
  Continuation continues_through = Continuation::kNone;  // absent from a file: "none"
  std::string note;                     // free text kept from the file
};

class RuleSet {
 public:
  // The rule for a body part and view (case and surrounding spaces ignored). A rule naming the
  // view wins over one that does not; among equals the first in the file wins; else default.
  const Rule& Find(std::string_view body_part, std::string_view view) const;

  const Rule& default_rule() const { return default_; }
  const std::vector<Rule>& rules() const { return rules_; }
  const std::string& source() const { return source_; }  // where the values come from
  const std::string& origin() const { return origin_; }  // file path, or "built-in defaults"

  // Parses rules JSON. `origin` names the text in errors (a path, or "built-in defaults").
  // Errors name the origin, the line and the key, e.g. "rules.json: line 12: rules[2].margin_mm".
  static Result<std::shared_ptr<const RuleSet>> Parse(std::string_view text,
                                                      const std::string& origin);

 private:
  Rule default_;
  std::vector<Rule> rules_;
  std::string source_;
  std::string origin_;
};

// The blade edges where anatomy at the blade is a likely cut-off under `rule`: `at_blade`
// without the edges the body is expected to run through. `ends` are the two field sides across
// the anatomy's long axis (when unknown, only kAllSides exempts an edge); `continuing_end` is
// the end a limb or the neck runs through, used by kOneEnd. Pure; the detector and the
// synthetic truth both call it.
std::vector<Side> CutOffSides(const std::vector<Side>& at_blade,
                              const std::optional<std::array<Side, 2>>& ends,
                              std::optional<Side> continuing_end, const Rule& rule);

// The canonical default rules (the same text as rules/default-rules.json).
std::string_view DefaultRulesJson();

// Loads a rules file; an empty path gives the built-in defaults.
Result<std::shared_ptr<const RuleSet>> LoadRules(const std::filesystem::path& file);

}  // namespace beamtrim
