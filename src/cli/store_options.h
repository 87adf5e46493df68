// The --store and --key-file options shared by the commands that open an audit store, so their
// names, help text and checks stay the same everywhere.
#pragma once

#include <string>

#include <CLI/CLI.hpp>

namespace beamtrim::cli {

struct StoreArgs {
  std::string store;
  std::string key_file;
};

// What the command does with the store and what its key file protects.
enum class StoreUse {
  kWrite,              // creates or migrates the store; the key hashes accession numbers
  kReadPseudonymised,  // reads the store; the key makes staff pseudonyms
};

// Adds --store (required) and --key-file to `cmd`, writing into `args` (which must outlive it).
void AddStoreOptions(CLI::App* cmd, StoreArgs& args, StoreUse use);

}  // namespace beamtrim::cli
