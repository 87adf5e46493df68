// Rules file parsing and rule lookup. Every error names the file, the line and the key, so a
// user who edited the rules can find the mistake (docs/rules.md).
#include "beamtrim/rules.h"

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>
#include <cstring>
#include <fstream>
#include <optional>
#include <sstream>
#include <variant>

#include <nlohmann/json.hpp>

namespace beamtrim {
namespace {

using nlohmann::json;
using PathStep = std::variant<std::string, size_t>;
using JsonPath = std::vector<PathStep>;

std::string PathText(const JsonPath& path) {
  std::string out;
  for (const PathStep& step : path) {
    if (const auto* key = std::get_if<std::string>(&step)) {
      if (!out.empty()) out += '.';
      out += *key;
    } else {
      out += '[' + std::to_string(std::get<size_t>(step)) + ']';
    }
  }
  return out;
}

// ---- locating a key in the text ----------------------------------------------------------
// nlohmann::json keeps no positions, so a value error is mapped back to a line by walking the
// (already validated) text along the path.

class TextWalker {
 public:
  explicit TextWalker(std::string_view text) : text_(text) {}

  // 1-based line of the path's key (or array element); 0 when not found.
  int LineOf(const JsonPath& path) {
    pos_ = 0;
    SkipSpace();
    return Descend(path, 0);
  }

 private:
  int Descend(const JsonPath& path, size_t depth) {
    if (depth == path.size()) return LineAt(pos_);
    if (pos_ >= text_.size()) return 0;
    if (text_[pos_] == '{') return DescendObject(path, depth);
    if (text_[pos_] == '[') return DescendArray(path, depth);
    return 0;
  }

  int DescendObject(const JsonPath& path, size_t depth) {
    const auto* want = std::get_if<std::string>(&path[depth]);
    ++pos_;
    SkipSpace();
    while (pos_ < text_.size() && text_[pos_] != '}') {
      size_t key_pos = pos_;
      std::string key = ReadString();
      SkipSpace();
      ++pos_;  // ':'
      SkipSpace();
      if (want && key == *want) {
        return depth + 1 == path.size() ? LineAt(key_pos) : Descend(path, depth + 1);
      }
      SkipValue();
      SkipSpace();
      if (pos_ < text_.size() && text_[pos_] == ',') ++pos_;
      SkipSpace();
    }
    return 0;
  }

  int DescendArray(const JsonPath& path, size_t depth) {
    const auto* want = std::get_if<size_t>(&path[depth]);
    ++pos_;
    SkipSpace();
    for (size_t index = 0; pos_ < text_.size() && text_[pos_] != ']'; ++index) {
      if (want && index == *want) return Descend(path, depth + 1);
      SkipValue();
      SkipSpace();
      if (pos_ < text_.size() && text_[pos_] == ',') ++pos_;
      SkipSpace();
    }
    return 0;
  }

  std::string ReadString() {
    std::string out;
    if (pos_ >= text_.size() || text_[pos_] != '"') return out;
    for (++pos_; pos_ < text_.size() && text_[pos_] != '"'; ++pos_) {
      if (text_[pos_] == '\\') ++pos_;  // keys with escapes never match a rules key anyway
      if (pos_ < text_.size()) out += text_[pos_];
    }
    ++pos_;
    return out;
  }

  void SkipValue() {
    if (pos_ >= text_.size()) return;
    char c = text_[pos_];
    if (c == '"') {
      ReadString();
      return;
    }
    if (c == '{' || c == '[') {
      int level = 0;
      while (pos_ < text_.size()) {
        char d = text_[pos_];
        if (d == '"') {
          ReadString();
          continue;
        }
        if (d == '{' || d == '[') ++level;
        if (d == '}' || d == ']') --level;
        ++pos_;
        if (level == 0) return;
      }
      return;
    }
    while (pos_ < text_.size() && !std::strchr(",}] \t\r\n", text_[pos_])) ++pos_;
  }

  void SkipSpace() {
    while (pos_ < text_.size() && std::isspace(static_cast<unsigned char>(text_[pos_]))) ++pos_;
  }

  int LineAt(size_t pos) const {
    pos = std::min(pos, text_.size());
    return 1 + static_cast<int>(std::count(text_.begin(), text_.begin() + pos, '\n'));
  }

  std::string_view text_;
  size_t pos_ = 0;
};

// ---- value checks --------------------------------------------------------------------------

struct RuleError {
  JsonPath path;
  std::string reason;
};

const std::vector<std::string> kRuleKeys = {"name",        "body_parts",
                                            "views",       "margin_mm",
                                            "max_excess_fraction", "require_all_borders",
                                            "clipped_sides_allowed", "continues_through",
                                            "note"};
constexpr std::array<Continuation, 4> kContinuations = {
    Continuation::kNone, Continuation::kOneEnd, Continuation::kBothEnds, Continuation::kAllSides};

const std::vector<std::string> kTopKeys = {"schema", "version", "source", "default", "rules"};

JsonPath With(JsonPath path, PathStep step) {
  path.push_back(std::move(step));
  return path;
}

void CheckKnownKeys(const json& j, const JsonPath& path, const std::vector<std::string>& keys) {
  if (!j.is_object()) throw RuleError{path, "must be an object { ... }"};
  for (const auto& [key, value] : j.items()) {
    if (std::find(keys.begin(), keys.end(), key) == keys.end()) {
      std::string list;
      for (const std::string& k : keys) list += (list.empty() ? "" : ", ") + k;
      throw RuleError{With(path, key), "unknown key (known keys: " + list + ")"};
    }
  }
}

double GetNumber(const json& j, const JsonPath& path, double lo, double hi) {
  if (!j.is_number()) throw RuleError{path, "must be a number"};
  double v = j.get<double>();
  if (!std::isfinite(v) || v < lo || v > hi) {
    std::ostringstream reason;
    reason << "must be between " << lo << " and " << hi << " (found " << j.dump() << ")";
    throw RuleError{path, reason.str()};
  }
  return v;
}

std::string Upper(std::string_view s) {
  size_t b = 0;
  size_t e = s.size();
  while (b < e && std::isspace(static_cast<unsigned char>(s[b]))) ++b;
  while (e > b && std::isspace(static_cast<unsigned char>(s[e - 1]))) --e;
  std::string out(s.substr(b, e - b));
  for (char& c : out) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return out;
}

std::vector<std::string> GetNames(const json& j, const JsonPath& path) {
  if (!j.is_array()) throw RuleError{path, "must be a list of names [\"HAND\", ...]"};
  std::vector<std::string> out;
  for (size_t i = 0; i < j.size(); ++i) {
    if (!j[i].is_string() || Upper(j[i].get<std::string>()).empty()) {
      throw RuleError{With(path, i), "must be a non-empty text"};
    }
    out.push_back(Upper(j[i].get<std::string>()));
  }
  return out;
}

// Fills `rule` from `j`; keys that are absent keep the values already in `rule`.
void ReadRule(const json& j, const JsonPath& path, Rule* rule) {
  CheckKnownKeys(j, path, kRuleKeys);
  if (j.contains("name")) {
    if (!j["name"].is_string() || j["name"].get<std::string>().empty()) {
      throw RuleError{With(path, "name"), "must be a non-empty text"};
    }
    rule->name = j["name"].get<std::string>();
  }
  if (j.contains("body_parts")) rule->body_parts = GetNames(j["body_parts"], With(path, "body_parts"));
  if (j.contains("views")) rule->views = GetNames(j["views"], With(path, "views"));
  if (j.contains("margin_mm")) rule->margin_mm = GetNumber(j["margin_mm"], With(path, "margin_mm"), 0, 200);
  if (j.contains("max_excess_fraction")) {
    rule->max_excess_fraction =
        GetNumber(j["max_excess_fraction"], With(path, "max_excess_fraction"), 0, 1);
  }
  if (j.contains("require_all_borders")) {
    if (!j["require_all_borders"].is_boolean()) {
      throw RuleError{With(path, "require_all_borders"), "must be true or false"};
    }
    rule->require_all_borders = j["require_all_borders"].get<bool>();
  }
  if (j.contains("clipped_sides_allowed")) {
    const json& v = j["clipped_sides_allowed"];
    if (!v.is_number_integer() || v.get<int64_t>() < 0 || v.get<int64_t>() > 4) {
      throw RuleError{With(path, "clipped_sides_allowed"),
                      "must be a whole number from 0 to 4 (found " + v.dump() + ")"};
    }
    rule->clipped_sides_allowed = v.get<int>();
  }
  if (j.contains("continues_through")) {
    const json& v = j["continues_through"];
    std::optional<Continuation> c;
    for (Continuation k : kContinuations) {
      if (v.is_string() && v.get<std::string>() == ContinuationName(k)) c = k;
    }
    if (!c) {
      throw RuleError{With(path, "continues_through"),
                      "must be \"none\", \"one end\", \"both ends\" or \"all sides\" (found " +
                          v.dump() + ")"};
    }
    rule->continues_through = *c;
  }
  if (j.contains("note")) {
    if (!j["note"].is_string()) throw RuleError{With(path, "note"), "must be a text"};
    rule->note = j["note"].get<std::string>();
  }
}

bool Matches(const std::vector<std::string>& names, const std::string& value) {
  return std::find(names.begin(), names.end(), value) != names.end();
}

}  // namespace

const char* ContinuationName(Continuation c) {
  switch (c) {
    case Continuation::kOneEnd: return "one end";
    case Continuation::kBothEnds: return "both ends";
    case Continuation::kAllSides: return "all sides";
    case Continuation::kNone: break;
  }
  return "none";
}

std::vector<Side> CutOffSides(const std::vector<Side>& at_blade,
                              const std::optional<std::array<Side, 2>>& ends,
                              std::optional<Side> continuing_end, const Rule& rule) {
  std::vector<Side> out;
  for (Side side : at_blade) {
    bool is_end = ends && ((*ends)[0] == side || (*ends)[1] == side);
    bool continues = false;
    switch (rule.continues_through) {
      case Continuation::kAllSides: continues = true; break;
      case Continuation::kBothEnds: continues = is_end; break;
      case Continuation::kOneEnd: continues = is_end && continuing_end == side; break;
      case Continuation::kNone: break;
    }
    if (!continues) out.push_back(side);
  }
  return out;
}

const Rule& RuleSet::Find(std::string_view body_part, std::string_view view) const {
  std::string part = Upper(body_part);
  std::string v = Upper(view);
  const Rule* without_view = nullptr;
  for (const Rule& rule : rules_) {
    bool part_ok = rule.body_parts.empty() || Matches(rule.body_parts, part);
    if (!part_ok) continue;
    if (!rule.views.empty()) {
      if (Matches(rule.views, v)) return rule;
    } else if (!without_view) {
      without_view = &rule;
    }
  }
  return without_view ? *without_view : default_;
}

Result<std::shared_ptr<const RuleSet>> RuleSet::Parse(std::string_view text,
                                                      const std::string& origin) {
  json j;
  try {
    j = json::parse(text.begin(), text.end());
  } catch (const json::parse_error& e) {
    size_t byte = e.byte > 0 ? e.byte - 1 : 0;
    byte = std::min(byte, text.size());
    int line = 1 + static_cast<int>(std::count(text.begin(), text.begin() + byte, '\n'));
    size_t line_start = text.rfind('\n', byte == 0 ? 0 : byte - 1);
    size_t column = line_start == std::string_view::npos ? byte + 1 : byte - line_start;
    return MakeError(ErrorKind::kInvalidInput, origin,
                     "not valid JSON at line " + std::to_string(line) + ", column " +
                         std::to_string(column) + " (a missing comma, quote or bracket?)",
                     "line " + std::to_string(line));
  }
  auto rules = std::make_shared<RuleSet>();
  rules->origin_ = origin;
  try {
    CheckKnownKeys(j, {}, kTopKeys);
    if (!j.contains("schema") || j["schema"] != kRulesSchema) {
      throw RuleError{{"schema"}, std::string("must be \"") + kRulesSchema + "\""};
    }
    if (j.contains("version") &&
        (!j["version"].is_number_integer() || j["version"].get<int64_t>() < 1 ||
         j["version"].get<int64_t>() > kRulesVersion)) {
      throw RuleError{{"version"}, "must be 1 (the rules version this beamtrim reads)"};
    }
    if (j.contains("source")) {
      if (!j["source"].is_string()) throw RuleError{{"source"}, "must be a text"};
      rules->source_ = j["source"].get<std::string>();
    }
    if (!j.contains("default")) throw RuleError{{}, "the key \"default\" is missing"};
    rules->default_.name = "default";
    ReadRule(j["default"], {"default"}, &rules->default_);
    if (j.contains("rules")) {
      if (!j["rules"].is_array()) throw RuleError{{"rules"}, "must be a list [ { ... }, ... ]"};
      for (size_t i = 0; i < j["rules"].size(); ++i) {
        Rule rule = rules->default_;  // a rule inherits what it does not set
        rule.name.clear();
        rule.note.clear();
        JsonPath path = {std::string("rules"), i};
        ReadRule(j["rules"][i], path, &rule);
        if (rule.name.empty()) throw RuleError{path, "needs a \"name\""};
        if (rule.body_parts.empty() && rule.views.empty()) {
          throw RuleError{path, "needs \"body_parts\" or \"views\" (else it would hide the default)"};
        }
        rules->rules_.push_back(std::move(rule));
      }
    }
  } catch (const RuleError& e) {
    int line = TextWalker(text).LineOf(e.path);
    std::string where = line > 0 ? "line " + std::to_string(line) : std::string();
    std::string key = PathText(e.path);
    std::string attribute = where.empty() ? key : key.empty() ? where : where + ": " + key;
    return MakeError(ErrorKind::kInvalidInput, origin, e.reason, attribute);
  }
  return std::shared_ptr<const RuleSet>(std::move(rules));
}

Result<std::shared_ptr<const RuleSet>> LoadRules(const std::filesystem::path& file) {
  if (file.empty()) return RuleSet::Parse(DefaultRulesJson(), "built-in defaults");
  std::error_code ec;
  if (!std::filesystem::exists(file, ec)) {
    return MakeError(ErrorKind::kNotFound, file.string(), "rules file not found");
  }
  std::ifstream in(file, std::ios::binary);
  if (!in) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot open the rules file");
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot read the rules file");
  return RuleSet::Parse(text.str(), file.string());
}

}  // namespace beamtrim
