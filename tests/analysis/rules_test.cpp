// Rules file: defaults, lookup, and error messages that name the file, the line and the key.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include "beamtrim/rules.h"

using namespace beamtrim;

namespace {

std::string ReadText(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

std::string ErrorText(std::string_view json) {
  auto r = RuleSet::Parse(json, "my-rules.json");
  REQUIRE_FALSE(r.ok());
  return r.error().ToString();
}

}  // namespace

TEST_CASE("ShippedRulesFileEqualsTheBuiltInDefaults") {
  // The file users copy and edit must be exactly the text that runs by default.
  std::string file = ReadText(std::filesystem::path(BEAMTRIM_SOURCE_DIR) / "rules/default-rules.json");
  CHECK(file == std::string(DefaultRulesJson()));
}

TEST_CASE("DefaultRulesLoadAndSayWhereTheValuesComeFrom") {
  auto rules = LoadRules({});
  REQUIRE(rules.ok());
  // Labelled as common practice: there is no single published source for these margins.
  CHECK((*rules)->source().find("common practice, no single source") != std::string::npos);
  CHECK((*rules)->origin() == "built-in defaults");
  CHECK((*rules)->default_rule().name == "default");
  CHECK((*rules)->rules().size() >= 5);
}

TEST_CASE("RuleLookupIgnoresCaseAndPrefersAViewSpecificRule") {
  auto rules = LoadRules({});
  REQUIRE(rules.ok());
  const RuleSet& r = **rules;
  CHECK(r.Find("hand", "PA").name == "hand and wrist");
  CHECK(r.Find(" Chest ", "ll").name == "chest lateral");
  CHECK(r.Find("CHEST", "PA").name == "chest");
  CHECK(r.Find("CHEST", "").name == "chest");
  CHECK(r.Find("SPLEEN", "AP").name == "default");
  CHECK(r.Find("", "").name == "default");
}

TEST_CASE("RuleInheritsUnsetValuesFromTheDefault") {
  auto rules = RuleSet::Parse(R"({"schema": "beamtrim.rules", "version": 1,
    "default": {"margin_mm": 7, "max_excess_fraction": 0.2, "require_all_borders": false,
                "clipped_sides_allowed": 3},
    "rules": [{"name": "knee", "body_parts": ["knee"], "margin_mm": 12}]})",
                              "inline");
  REQUIRE(rules.ok());
  const Rule& knee = (*rules)->Find("KNEE", "AP");
  CHECK(knee.margin_mm == 12);
  CHECK(knee.max_excess_fraction == doctest::Approx(0.2));
  CHECK_FALSE(knee.require_all_borders);
  CHECK(knee.clipped_sides_allowed == 3);
  CHECK((*rules)->Find("ELBOW", "AP").margin_mm == 7);
}

TEST_CASE("MissingRulesFileIsReportedWithItsPath") {
  auto r = LoadRules("/nonexistent/dir/rules.json");
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().kind == ErrorKind::kNotFound);
  CHECK(r.error().ToString().find("/nonexistent/dir/rules.json") != std::string::npos);
}

TEST_CASE("JsonSyntaxErrorNamesFileAndLine") {
  // Line 3 lacks the comma after the value; the parser stops on line 4 at the next key.
  std::string text = ErrorText("{\n  \"schema\": \"beamtrim.rules\",\n  \"version\": 1\n  \"default\": {}\n}\n");
  CHECK(text.find("my-rules.json") != std::string::npos);
  CHECK(text.find("line 4") != std::string::npos);
  CHECK(text.find("not valid JSON") != std::string::npos);
}

TEST_CASE("BadValueNamesFileLineAndKey") {
  std::string json =
      "{\n"
      "  \"schema\": \"beamtrim.rules\",\n"
      "  \"version\": 1,\n"
      "  \"default\": {\"margin_mm\": 10},\n"
      "  \"rules\": [\n"
      "    {\"name\": \"hand\", \"body_parts\": [\"HAND\"]},\n"
      "    {\"name\": \"foot\",\n"
      "     \"body_parts\": [\"FOOT\"],\n"
      "     \"max_excess_fraction\": 1.5}\n"
      "  ]\n"
      "}\n";
  std::string text = ErrorText(json);
  CHECK(text.find("my-rules.json") != std::string::npos);
  CHECK(text.find("line 9") != std::string::npos);
  CHECK(text.find("rules[1].max_excess_fraction") != std::string::npos);
  CHECK(text.find("between 0 and 1") != std::string::npos);
}

TEST_CASE("WrongTypeAndUnknownKeyAreNamed") {
  std::string wrong_type = ErrorText(
      "{\"schema\": \"beamtrim.rules\",\n\"default\": {\n\"require_all_borders\": \"yes\"}}");
  CHECK(wrong_type.find("line 3") != std::string::npos);
  CHECK(wrong_type.find("default.require_all_borders") != std::string::npos);
  CHECK(wrong_type.find("true or false") != std::string::npos);

  std::string typo = ErrorText(
      "{\"schema\": \"beamtrim.rules\",\n\"default\": {},\n\"rules\": [{\"name\": \"x\",\n"
      "\"body_parts\": [\"HAND\"],\n\"margin\": 5}]}");
  CHECK(typo.find("line 5") != std::string::npos);
  CHECK(typo.find("rules[0].margin") != std::string::npos);
  CHECK(typo.find("unknown key") != std::string::npos);

  std::string sides = ErrorText(
      "{\"schema\": \"beamtrim.rules\", \"default\": {\"clipped_sides_allowed\": 5}}");
  CHECK(sides.find("default.clipped_sides_allowed") != std::string::npos);
  CHECK(sides.find("0 to 4") != std::string::npos);
}

TEST_CASE("WrongSchemaAndMissingDefaultAreRejected") {
  CHECK(ErrorText("{\"schema\": \"other\", \"default\": {}}").find("schema") != std::string::npos);
  CHECK(ErrorText("{\"schema\": \"beamtrim.rules\"}").find("\"default\" is missing") !=
        std::string::npos);
  CHECK(ErrorText("[1, 2]").find("must be an object") != std::string::npos);
  CHECK(ErrorText("").find("not valid JSON") != std::string::npos);
}

TEST_CASE("RulesFileOnDiskLoads") {
  auto dir = std::filesystem::temp_directory_path() / "beamtrim-rules-test";
  std::filesystem::create_directories(dir);
  auto file = dir / "ok.json";
  std::ofstream(file) << R"({"schema": "beamtrim.rules", "default": {"margin_mm": 3}})";
  auto r = LoadRules(file);
  REQUIRE(r.ok());
  CHECK((*r)->default_rule().margin_mm == 3);
  CHECK((*r)->origin() == file.string());
  std::filesystem::remove_all(dir);
}

TEST_CASE("ContinuesThroughIsReadAndABadValueIsNamed") {
  auto r = RuleSet::Parse(
      "{\"schema\": \"beamtrim.rules\", \"default\": {\"continues_through\": \"one end\"},\n"
      "\"rules\": [{\"name\": \"x\", \"body_parts\": [\"KNEE\"]}]}",
      "my-rules.json");
  REQUIRE(r.ok());
  CHECK((*r)->default_rule().continues_through == Continuation::kOneEnd);
  CHECK((*r)->Find("KNEE", "").continues_through == Continuation::kOneEnd);  // inherited
  // A file written before the key existed keeps the old meaning: every edge is a cut-off.
  auto old = RuleSet::Parse("{\"schema\": \"beamtrim.rules\", \"default\": {}}", "old.json");
  REQUIRE(old.ok());
  CHECK((*old)->default_rule().continues_through == Continuation::kNone);

  std::string bad = ErrorText(
      "{\"schema\": \"beamtrim.rules\",\n\"default\": {\n\"continues_through\": \"top\"}}");
  CHECK(bad.find("line 3") != std::string::npos);
  CHECK(bad.find("default.continues_through") != std::string::npos);
  CHECK(bad.find("\"both ends\"") != std::string::npos);
}

TEST_CASE("CutOffSidesLeavesOutTheEdgesTheBodyRunsThrough") {
  // The definition in docs/method.md ("Clipping"; common practice, no single source): a
  // table of cases worked by hand.
  const std::vector<Side> all = {Side::kLeft, Side::kRight, Side::kTop, Side::kBottom};
  const std::array<Side, 2> vertical = {Side::kTop, Side::kBottom};
  Rule r;
  r.continues_through = Continuation::kNone;
  CHECK(CutOffSides(all, vertical, Side::kBottom, r) == all);
  r.continues_through = Continuation::kAllSides;
  CHECK(CutOffSides(all, vertical, Side::kBottom, r).empty());
  r.continues_through = Continuation::kBothEnds;
  CHECK(CutOffSides(all, vertical, Side::kBottom, r) == std::vector<Side>{Side::kLeft, Side::kRight});
  r.continues_through = Continuation::kOneEnd;
  CHECK(CutOffSides(all, vertical, Side::kBottom, r) ==
        std::vector<Side>{Side::kLeft, Side::kRight, Side::kTop});
  // No continuing end found (fingertips only): every edge of a hand is a cut-off.
  CHECK(CutOffSides({Side::kTop}, vertical, std::nullopt, r) == std::vector<Side>{Side::kTop});
  // Long axis unknown: only "all sides" exempts anything.
  r.continues_through = Continuation::kBothEnds;
  CHECK(CutOffSides({Side::kTop}, std::nullopt, std::nullopt, r) == std::vector<Side>{Side::kTop});
}

TEST_CASE("ShippedRulesSayWhichEdgesTheBodyRunsThrough") {
  // Common practice, no single source: limbs through both ends, hand, foot and skull through
  // one end, the trunk through every edge.
  auto rules = LoadRules({});
  REQUIRE(rules.ok());
  CHECK((*rules)->Find("KNEE", "AP").continues_through == Continuation::kBothEnds);
  CHECK((*rules)->Find("HAND", "PA").continues_through == Continuation::kOneEnd);
  CHECK((*rules)->Find("SKULL", "PA").continues_through == Continuation::kOneEnd);
  CHECK((*rules)->Find("CHEST", "PA").continues_through == Continuation::kAllSides);
  CHECK((*rules)->Find("PELVIS", "AP").continues_through == Continuation::kAllSides);
  CHECK(std::string(ContinuationName(Continuation::kBothEnds)) == "both ends");
}
