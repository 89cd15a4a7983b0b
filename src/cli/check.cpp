// aerosect check CASE: validate a case and print its derived quantities.

#include <memory>

#include "aerosect/analysis/report.hpp"
#include "aerosect/io/case.hpp"
#include "command.hpp"

namespace aerosect::cli {

Command add_check_command(CLI::App& app) {
  auto o = std::make_shared<CaseOptions>();
  CLI::App* cmd = app.add_subcommand("check", "validate a case and print its derived quantities");
  add_case_options(cmd, *o);
  return {cmd, [o] {
            const Case c = load_case(o->case_path, o->overrides);
            const CheckReport r = check_case(c);
            print(o->json ? check_json(c, r).dump(2) + "\n" : check_text(c, r));
            return 0;
          }};
}

}  // namespace aerosect::cli
