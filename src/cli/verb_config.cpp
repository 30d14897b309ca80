// spinflip config --list | --markdown: the key reference, generated from the
// one declaration of every key (campaign::campaign_schema()).
#include <iostream>

#include "campaign/schema.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {
RegisterVerb config_verb("config", "list every configuration key with its default, unit and doc", 90,
                         [](CLI::App& sub) -> VerbRun {
                           auto markdown = std::make_shared<bool>(false);
                           auto list = std::make_shared<bool>(false);
                           sub.add_flag("--list", *list, "every key, default, unit and doc (plain text)");
                           sub.add_flag("--markdown", *markdown, "the same as a Markdown reference page");
                           return [=]() {
                             const auto& schema = campaign::campaign_schema();
                             if (world_rank() != 0) return 0;
                             std::cout << (*markdown ? schema.reference_markdown() : schema.list_text());
                             return 0;
                           };
                         });
}  // namespace
}  // namespace spinflip::cli
