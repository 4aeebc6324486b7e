#include "drivers/pseudo_terminal.hpp"

#include <fcntl.h>
#include <termios.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <utility>

namespace veq::drivers {

namespace {

Error os_error(const std::string& what) {
  return make_error(ErrorKind::io,
                    "pseudo-terminal: " + what + " failed (" + std::strerror(errno) + ")");
}

void close_fd(int& fd) {
  if (fd >= 0)
    ::close(fd);
  fd = -1;
}

}  // namespace

Result<PseudoTerminal> PseudoTerminal::open() {
  int master = ::posix_openpt(O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (master < 0)
    return os_error("posix_openpt");
  if (::grantpt(master) != 0 || ::unlockpt(master) != 0) {
    Error e = os_error("grantpt/unlockpt");
    ::close(master);
    return e;
  }
  char name[128];
  if (::ptsname_r(master, name, sizeof name) != 0) {
    Error e = os_error("ptsname");
    ::close(master);
    return e;
  }
  int slave = ::open(name, O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (slave < 0) {
    Error e = os_error(std::string("opening ") + name);
    ::close(master);
    return e;
  }
  termios raw{};
  if (::tcgetattr(slave, &raw) == 0) {
    ::cfmakeraw(&raw);
    ::tcsetattr(slave, TCSANOW, &raw);
  }
  return PseudoTerminal(master, slave, name);
}

PseudoTerminal::PseudoTerminal(int master_fd, int slave_fd, std::string slave_path)
    : master_fd_(master_fd), slave_fd_(slave_fd), slave_path_(std::move(slave_path)) {}

PseudoTerminal::PseudoTerminal(PseudoTerminal&& other) noexcept
    : master_fd_(std::exchange(other.master_fd_, -1)),
      slave_fd_(std::exchange(other.slave_fd_, -1)),
      slave_path_(std::move(other.slave_path_)) {}

PseudoTerminal& PseudoTerminal::operator=(PseudoTerminal&& other) noexcept {
  if (this != &other) {
    close_fd(master_fd_);
    close_fd(slave_fd_);
    master_fd_ = std::exchange(other.master_fd_, -1);
    slave_fd_ = std::exchange(other.slave_fd_, -1);
    slave_path_ = std::move(other.slave_path_);
  }
  return *this;
}

PseudoTerminal::~PseudoTerminal() {
  close_fd(master_fd_);
  close_fd(slave_fd_);
}

int PseudoTerminal::release_master() {
  return std::exchange(master_fd_, -1);
}

void PseudoTerminal::close_master() {
  close_fd(master_fd_);
}

}  // namespace veq::drivers
