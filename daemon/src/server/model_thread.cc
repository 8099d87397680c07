#include "rimwatch/daemon/model_thread.h"

#include <pthread.h>

#include <utility>

namespace rimwatch::daemon {

ModelThread::ModelThread() : thread_([this] { Loop(); }) {}

ModelThread::~ModelThread() {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    stop_ = true;
  }
  work_.notify_one();
  thread_.join();
}

void ModelThread::Submit(std::vector<std::function<void()>> tasks) {
  if (tasks.empty()) return;
  {
    std::lock_guard<std::mutex> lock(mutex_);
    for (auto& t : tasks) queue_.push_back(std::move(t));
    unfinished_ += tasks.size();
  }
  work_.notify_one();
}

void ModelThread::Drain() {
  std::unique_lock<std::mutex> lock(mutex_);
  done_.wait(lock, [this] { return unfinished_ == 0; });
}

std::size_t ModelThread::Backlog() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return unfinished_;
}

bool ModelThread::WaitBelow(std::size_t n, std::chrono::milliseconds timeout) {
  std::unique_lock<std::mutex> lock(mutex_);
  return done_.wait_for(lock, timeout, [&] { return unfinished_ < n; });
}

void ModelThread::Loop() {
  pthread_setname_np(pthread_self(), "rw-model");  // shown by top -H, perf and /proc
  std::unique_lock<std::mutex> lock(mutex_);
  for (;;) {
    work_.wait(lock, [this] { return stop_ || !queue_.empty(); });
    if (queue_.empty()) return;  // stop_, and nothing left to run
    std::function<void()> task = std::move(queue_.front());
    queue_.pop_front();
    lock.unlock();
    task();
    task = nullptr;  // release what it captured before reporting it finished
    lock.lock();
    --unfinished_;
    done_.notify_all();
  }
}

}  // namespace rimwatch::daemon
