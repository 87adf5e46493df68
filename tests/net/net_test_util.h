// Helpers for the network tests: free loopback ports, child processes that are always cleaned
// up (RAII plus a parent-death signal), synthetic radiographs, and store look-ups.
// Every connection goes to 127.0.0.1 only.
#pragma once

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <memory>
#include <optional>
#include <random>
#include <set>
#include <stdexcept>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/dicom_writer.h"

namespace beamtrim::nettest {

namespace fs = std::filesystem;

// A fresh folder under the system temp folder, removed on destruction.
class TempDir {
 public:
  TempDir() {
    std::random_device rd;
    path_ = fs::temp_directory_path() /
            ("beamtrim-net-" + std::to_string(::getpid()) + "-" + std::to_string(rd()));
    fs::create_directories(path_);
  }
  ~TempDir() {
    std::error_code ec;
    fs::remove_all(path_, ec);
  }
  const fs::path& path() const { return path_; }

 private:
  fs::path path_;
};

// A port that was free on 127.0.0.1 a moment ago (the kernel picks it from its ephemeral
// range, so parallel test processes rarely meet), never one this process handed out before:
// a test that needs two ports gets two different ones.
inline int FreePort() {
  static std::set<int> handed_out;
  for (int attempt = 0; attempt < 50; ++attempt) {
    int fd = ::socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in addr{};
    addr.sin_family = AF_INET;
    addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    addr.sin_port = 0;
    socklen_t len = sizeof(addr);
    int port = 0;
    if (::bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) == 0 &&
        ::getsockname(fd, reinterpret_cast<sockaddr*>(&addr), &len) == 0) {
      port = ntohs(addr.sin_port);
    }
    ::close(fd);
    if (port > 0 && handed_out.insert(port).second) return port;
  }
  throw std::runtime_error("no free loopback port");
}

inline int ConnectLoopback(int port) {
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  addr.sin_port = htons(static_cast<uint16_t>(port));
  if (::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) != 0) {
    ::close(fd);
    return -1;
  }
  return fd;
}

// True once something accepts connections on 127.0.0.1:port (bounded number of tries).
inline bool WaitForPort(int port, int tries = 300) {
  for (int i = 0; i < tries; ++i) {
    int fd = ConnectLoopback(port);
    if (fd >= 0) {
      ::close(fd);
      return true;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  return false;
}

// A child process; output goes to a log file. The destructor stops it (SIGTERM, then SIGKILL)
// so that a failing check never leaves a peer running; PR_SET_PDEATHSIG covers a crash of the
// test binary itself.
class Child {
 public:
  Child(std::vector<std::string> argv, fs::path log) : log_(std::move(log)) {
    pid_ = ::fork();
    if (pid_ == 0) {
      ::prctl(PR_SET_PDEATHSIG, SIGKILL);
      int fd = ::open(log_.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0600);
      ::dup2(fd, 1);
      ::dup2(fd, 2);
      std::vector<char*> args;
      for (std::string& a : argv) args.push_back(a.data());
      args.push_back(nullptr);
      ::execvp(args[0], args.data());
      ::_exit(127);
    }
  }
  ~Child() { Stop(); }
  Child(const Child&) = delete;
  Child& operator=(const Child&) = delete;

  // Sends `sig` and waits for the exit (SIGKILL after `tries` x 50 ms). Returns the exit code,
  // or 128 + signal number.
  int Stop(int sig = SIGTERM, int tries = 400) {
    if (pid_ <= 0) return exit_code_;
    ::kill(pid_, sig);
    for (int i = 0; i < tries; ++i) {
      if (Reap(WNOHANG)) return exit_code_;
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    ::kill(pid_, SIGKILL);
    Reap(0);
    return exit_code_;
  }

  // Waits for the child to end by itself (bounded, then killed). Returns the exit code.
  int Wait(int tries = 1200) {
    for (int i = 0; i < tries && pid_ > 0; ++i) {
      if (Reap(WNOHANG)) return exit_code_;
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    return Stop(SIGKILL);
  }

  // True once the child has ended (it is reaped then).
  bool Exited() { return pid_ <= 0 || Reap(WNOHANG); }

  std::string Log() const {
    std::ifstream in(log_);
    std::stringstream text;
    text << in.rdbuf();
    return text.str();
  }

 private:
  bool Reap(int flags) {
    int status = 0;
    pid_t r = ::waitpid(pid_, &status, flags);
    if (r != pid_) return false;
    exit_code_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
    pid_ = -1;
    return true;
  }

  pid_t pid_ = -1;
  int exit_code_ = -1;
  fs::path log_;
};

// True once `server` accepts connections on 127.0.0.1:port; false as soon as it has ended
// (for instance because another process took the port in the meantime) or after a bound.
inline bool WaitForServer(Child& server, int port, int tries = 300) {
  for (int i = 0; i < tries; ++i) {
    if (server.Exited()) return false;
    int fd = ConnectLoopback(port);
    if (fd >= 0) {
      ::close(fd);
      return true;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  return false;
}

// Starts a server on a free port, trying another port when the one picked was taken before the
// server could bind it. `make` builds the child for a port. Returns nullptr when every try failed.
template <class Make>
std::unique_ptr<Child> StartServer(int& port, Make make, int tries = 3) {
  for (int i = 0; i < tries; ++i) {
    if (i > 0) port = FreePort();
    std::unique_ptr<Child> server = make(port);
    if (WaitForServer(*server, port)) return server;
  }
  return nullptr;
}

// Runs a program to completion (bounded) and returns its exit code.
inline int Run(std::vector<std::string> argv, const fs::path& log) {
  Child child(std::move(argv), log);
  return child.Wait();
}

struct SynthImage {
  std::string sop_instance_uid;
  std::string study_instance_uid;
  std::string study_date;
  TransferSyntax syntax = TransferSyntax::kExplicitLittle;
  fs::path file;
};

// A small synthetic DX radiograph (synthetic ground truth: an exposed rectangle on a dim
// background, invented identifiers) written with the project's DICOM writer.
inline SynthImage WriteSynthImage(const fs::path& file, const std::string& sop_uid,
                                  const std::string& study_uid, const std::string& date,
                                  TransferSyntax syntax = TransferSyntax::kExplicitLittle,
                                  const std::string& modality = "DX") {
  RadiographHeader h;
  h.sop_instance_uid = sop_uid;
  h.sop_class_uid = modality == "CR" ? "1.2.840.10008.5.1.4.1.1.1"
                                     : "1.2.840.10008.5.1.4.1.1.1.1";  // DX for presentation
  h.study_instance_uid = study_uid;
  h.series_instance_uid = study_uid + ".1";
  h.accession_number = "SYN" + date;
  h.modality = modality;
  h.presentation_intent_type = "FOR PRESENTATION";
  h.photometric_interpretation = "MONOCHROME2";
  h.rows = 96;
  h.columns = 80;
  h.bits_allocated = syntax == TransferSyntax::kJpegBaseline ? 8 : 16;
  h.bits_stored = syntax == TransferSyntax::kJpegBaseline ? 8 : 12;
  h.high_bit = h.bits_stored - 1;
  h.imager_pixel_spacing = std::array<double, 2>{0.5, 0.5};
  h.study_date = date;
  h.station_name = "ROOM-2";
  h.operators_name = "RT-07";
  h.body_part_examined = "HAND";
  StoredPixels pixels;
  pixels.width = h.columns;
  pixels.height = h.rows;
  const int high = syntax == TransferSyntax::kJpegBaseline ? 220 : 3000;
  const int low = syntax == TransferSyntax::kJpegBaseline ? 20 : 200;
  for (int y = 0; y < h.rows; ++y) {
    for (int x = 0; x < h.columns; ++x) {
      bool inside = x >= 15 && x < 65 && y >= 20 && y < 76;
      pixels.values.push_back(inside ? high : low);
    }
  }
  WriteOptions options;
  options.syntax = syntax;
  Status status = WriteRadiograph(h, pixels, file, options);
  if (!status.ok()) throw std::runtime_error(status.error().ToString());
  return {sop_uid, study_uid, date, syntax, file};
}

}  // namespace beamtrim::nettest
