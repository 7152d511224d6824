// The CLI's names for the API's enums come from the proto descriptors: every
// value, walked through the descriptor, is accepted in every spelling.
#include "client_cli/names.h"

#include <set>
#include <string>

#include "absl/strings/ascii.h"
#include "absl/strings/str_replace.h"
#include "client_cli/args.h"
#include "client_cli/json_io.h"
#include "client_cli/model_flags.h"
#include "gtest/gtest.h"
#include "riskbound/v1/certify.pb.h"

namespace riskbound::cli {
namespace {

TEST(NamesTest, EveryFamilyInEverySpelling) {
  const google::protobuf::EnumDescriptor* d = v1::BoundFamily_descriptor();
  std::set<std::string> words;
  for (int i = 0; i < d->value_count(); ++i) {
    const int number = d->value(i)->number();
    if (number == 0) {
      EXPECT_FALSE(FamilyFromName(d->value(i)->name()).has_value());
      continue;
    }
    const std::string full = d->value(i)->name();            // BOUND_FAMILY_VC_ADDITIVE
    const std::string bare = full.substr(sizeof("BOUND_FAMILY_") - 1);  // VC_ADDITIVE
    const std::string word = FamilyWord(number);
    EXPECT_TRUE(words.insert(word).second) << word << " twice";
    for (const std::string& name :
         {full, bare, absl::AsciiStrToLower(full), absl::AsciiStrToLower(bare),
          absl::StrReplaceAll(absl::AsciiStrToLower(bare), {{"_", "-"}}), word}) {
      const auto got = FamilyFromName(name);
      ASSERT_TRUE(got.has_value()) << name;
      EXPECT_EQ(*got, number) << name;
    }
  }
  // The two CLI words that differ from their enum names, kept from the first
  // releases (the server's Certificate.family_name spells them the same way).
  EXPECT_EQ(FamilyWord(v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL), "holdout-binomial");
  EXPECT_EQ(FamilyWord(v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF), "holdout-kl");
  EXPECT_EQ(FamilyWord(v1::BOUND_FAMILY_PAC_BAYES_KL), "pac-bayes-kl");
  EXPECT_FALSE(FamilyFromName("kl").has_value());
  EXPECT_EQ(FamilyWord(999), "family 999");
}

TEST(NamesTest, EveryModelKindInEverySpelling) {
  const google::protobuf::EnumDescriptor* d = v1::ModelKind_descriptor();
  for (int i = 0; i < d->value_count(); ++i) {
    const int number = d->value(i)->number();
    const std::string full = d->value(i)->name();
    if (number == 0) {
      EXPECT_FALSE(ModelKindFromName(full).has_value());
      continue;
    }
    const std::string bare = full.substr(sizeof("MODEL_KIND_") - 1);
    for (const std::string& name : {full, bare, absl::AsciiStrToLower(bare),
                                    absl::StrReplaceAll(absl::AsciiStrToLower(bare), {{"_", "-"}}),
                                    ModelKindWord(static_cast<v1::ModelKind>(number))}) {
      const auto got = ModelKindFromName(name);
      ASSERT_TRUE(got.has_value()) << name;
      EXPECT_EQ(*got, number) << name;
    }
  }
  EXPECT_EQ(*ModelKindFromName("relu"), v1::MODEL_KIND_RELU_NETWORK);
}

TEST(NamesTest, JsonFilesTakeTheCliSpellingsOfEnumValuesOnly) {
  // An id equal to a family word stays as it is; enum-typed values are mapped.
  const std::string json =
      R"({"listed": {"families": ["holdout-kl", "VC_ADDITIVE", "BOUND_FAMILY_OCCAM_KL"]},
          "evidence": {"training": {"capacity": {"model": {"kind": "relu"}}}},
          "failureProbability": 0.05})";
  v1::CertifyRequest request;
  ASSERT_TRUE(ParseJson(json, "test", &request).ok());
  ASSERT_EQ(request.listed().families_size(), 3);
  EXPECT_EQ(request.listed().families(0), v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF);
  EXPECT_EQ(request.listed().families(1), v1::BOUND_FAMILY_VC_ADDITIVE);
  EXPECT_EQ(request.listed().families(2), v1::BOUND_FAMILY_OCCAM_KL);
  EXPECT_EQ(request.evidence().training().capacity().model().kind(), v1::MODEL_KIND_RELU_NETWORK);
  // A string field is never rewritten, whatever it holds.
  EXPECT_EQ(NormalizeEnumWords(R"({"id": "holdout-kl"})", v1::CertifyRequest::descriptor()),
            R"({"id": "holdout-kl"})");
  // An unknown value is left for the parser, which refuses it.
  v1::CertifyRequest bad;
  EXPECT_FALSE(ParseJson(R"({"listed": {"families": ["no-such"]}})", "t", &bad).ok());
}

TEST(ArgsTest, AliasesHelpAndVersion) {
  const std::vector<OptionSpec> specs = {
      {"failure-probability", "D", "delta", false, {"delta"}},
      {"holdout-error-count", "K", "errors", false, {"errors"}},
  };
  auto parsed = ParseArgs(specs, {"--delta", "0.01", "--errors=3", "-h", "--version"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->Get("failure-probability"), "0.01");
  EXPECT_EQ(parsed->Get("holdout-error-count"), "3");
  EXPECT_FALSE(parsed->Has("delta"));
  EXPECT_TRUE(parsed->Has("help"));
  EXPECT_TRUE(parsed->Has("version"));
  auto twice = ParseArgs(specs, {"--delta", "0.01", "--failure-probability", "0.02"});
  EXPECT_EQ(twice.status().code(), absl::StatusCode::kInvalidArgument);
  const std::string help = FormatHelp("u", "s", specs);
  EXPECT_NE(help.find("--failure-probability D"), std::string::npos);
  EXPECT_NE(help.find("(also --delta)"), std::string::npos);
  EXPECT_NE(help.find("-h, --help"), std::string::npos);
  EXPECT_NE(help.find("--version"), std::string::npos);
}

}  // namespace
}  // namespace riskbound::cli
