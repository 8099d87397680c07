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

void ModelThread::Submit(std::vector<std::function<void()>>* tasks) {
  if (tasks->empty()) return;
  {
    std::lock_guard<std::mutex> lock(mutex_);
    for (auto& t : *tasks) queue_.push_back(std::move(t));
    unfinished_ += tasks->size();
    backlog_.store(unfinished_, std::memory_order_release);
  }
  tasks->clear();
  work_.notify_one();
}

void ModelThread::Drain() {
  std::unique_lock<std::mutex> lock(mutex_);
  wake_below_ = 1;
  done_.wait(lock, [this] { return unfinished_ == 0; });
  wake_below_ = 0;
}

std::size_t ModelThread::Backlog() const { return backlog_.load(std::memory_order_acquire); }

bool ModelThread::WaitBelow(std::size_t n, std::chrono::milliseconds timeout) {
  std::unique_lock<std::mutex> lock(mutex_);
  wake_below_ = n;
  const bool below = done_.wait_for(lock, timeout, [&] { return unfinished_ < n; });
  wake_below_ = 0;
  return below;
}

void ModelThread::Loop() {
  pthread_setname_np(pthread_self(), "rw-model");  // shown by top -H, perf and /proc
  // Everything queued is taken at once (one lock for the lot); each task is still reported
  // finished under the lock as soon as it returns, so Backlog, Drain and WaitBelow see every
  // finish when it happens (a slow task, such as a model rebuild, delays no one's wake).
  std::deque<std::function<void()>> batch;
  std::unique_lock<std::mutex> lock(mutex_);
  for (;;) {
    work_.wait(lock, [this] { return stop_ || !queue_.empty(); });
    if (queue_.empty()) return;  // stop_, and nothing left to run
    batch.swap(queue_);          // queue_ takes batch's (empty) storage
    lock.unlock();
    while (!batch.empty()) {
      {
        const std::function<void()> task = std::move(batch.front());
        batch.pop_front();
        task();
      }  // what the task captured is released before it is reported finished
      std::lock_guard<std::mutex> finished(mutex_);
      --unfinished_;
      backlog_.store(unfinished_, std::memory_order_release);
      // Only a waiter whose threshold is now met is woken: a wake per task would cost the waiting
      // poll thread (and this one) a futex call for every row while the queue is full.
      if (unfinished_ < wake_below_) done_.notify_all();
    }
    lock.lock();
  }
}

}  // namespace rimwatch::daemon
