// The shared --store / --key-file option block.
#include "cli/store_options.h"

namespace beamtrim::cli {

void AddStoreOptions(CLI::App* cmd, StoreArgs& args, StoreUse use) {
  const bool write = use == StoreUse::kWrite;
  cmd->add_option("--store", args.store,
                  write ? "Audit store file (created when absent, migrated when older)"
                        : "Audit store written by `beamtrim scan`")
      ->required();
  cmd->add_option("--key-file", args.key_file,
                  write ? "Secret key for the hashed accession numbers and study UIDs\n"
                          "(default: STORE.key, created with mode 0600 on first use)"
                        : "Secret key for the staff codes (created with mode 0600 when absent;\n"
                          "keep it with the manager)");
}

}  // namespace beamtrim::cli
