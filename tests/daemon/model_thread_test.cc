// ModelThread (daemon/include/rimwatch/daemon/model_thread.h): tasks run once each, in
// submission order; Drain returns after every earlier task; Backlog counts queued + running
// tasks; WaitBelow returns as soon as the backlog is under its threshold and gives up (false)
// at its timeout. The thread only wakes a waiter whose threshold is met, so these also check
// that no waiter is left asleep past the moment it was due.
#include "rimwatch/daemon/model_thread.h"

#include <gtest/gtest.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <mutex>
#include <vector>

namespace rimwatch::daemon {
namespace {

using Clock = std::chrono::steady_clock;
using std::chrono::milliseconds;

// A gate the tasks wait at until the test opens it.
class Gate {
 public:
  void Wait() {
    std::unique_lock<std::mutex> lock(mutex_);
    cv_.wait(lock, [this] { return open_; });
  }
  void Open() {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      open_ = true;
    }
    cv_.notify_all();
  }

 private:
  std::mutex mutex_;
  std::condition_variable cv_;
  bool open_ = false;
};

TEST(ModelThreadTest, RunsEveryTaskOnceInOrderAndDrainWaitsForThem) {
  ModelThread thread;
  std::vector<int> seen;  // written by the model thread only; read after Drain
  for (int batch = 0; batch < 50; ++batch) {
    std::vector<std::function<void()>> tasks;
    for (int i = 0; i < 40; ++i) {
      const int id = batch * 40 + i;
      tasks.emplace_back([&seen, id] { seen.push_back(id); });
    }
    thread.Submit(&tasks);
    EXPECT_TRUE(tasks.empty());  // taken over, the vector left for the next batch
  }
  thread.Drain();
  EXPECT_EQ(thread.Backlog(), 0u);
  ASSERT_EQ(seen.size(), 2000u);
  for (int i = 0; i < 2000; ++i) ASSERT_EQ(seen[i], i);
}

TEST(ModelThreadTest, BacklogCountsQueuedAndRunningTasks) {
  ModelThread thread;
  Gate gate;
  std::vector<std::function<void()>> tasks;
  for (int i = 0; i < 10; ++i) tasks.emplace_back([&gate] { gate.Wait(); });
  thread.Submit(&tasks);
  EXPECT_EQ(thread.Backlog(), 10u);  // one may be running: still counted
  // Nothing can finish while the gate is shut: the wait times out.
  const auto start = Clock::now();
  EXPECT_FALSE(thread.WaitBelow(10, milliseconds(50)));
  EXPECT_GE(Clock::now() - start, milliseconds(50));
  gate.Open();
  thread.Drain();
  EXPECT_EQ(thread.Backlog(), 0u);
}

TEST(ModelThreadTest, WaitBelowWakesWhenItsThresholdIsMet) {
  ModelThread thread;
  Gate first, rest;
  std::atomic<int> finished{0};
  std::vector<std::function<void()>> tasks;
  tasks.emplace_back([&] {
    first.Wait();
    ++finished;
  });
  for (int i = 0; i < 9; ++i) {
    tasks.emplace_back([&] {
      rest.Wait();
      ++finished;
    });
  }
  thread.Submit(&tasks);
  // Opening the first gate takes the backlog from 10 to 9 and then stalls on the second gate:
  // WaitBelow(10) must return true well before its (long) timeout, woken by that one finish.
  first.Open();
  const auto start = Clock::now();
  EXPECT_TRUE(thread.WaitBelow(10, std::chrono::seconds(30)));
  EXPECT_LT(Clock::now() - start, std::chrono::seconds(10));
  EXPECT_EQ(finished.load(), 1);
  // A threshold not met until every task is done.
  rest.Open();
  EXPECT_TRUE(thread.WaitBelow(1, std::chrono::seconds(30)));
  EXPECT_EQ(finished.load(), 10);
  EXPECT_EQ(thread.Backlog(), 0u);
}

TEST(ModelThreadTest, DestructorRunsWhatIsQueued) {
  std::atomic<int> ran{0};
  {
    ModelThread thread;
    std::vector<std::function<void()>> tasks;
    for (int i = 0; i < 100; ++i) tasks.emplace_back([&ran] { ++ran; });
    thread.Submit(&tasks);
  }
  EXPECT_EQ(ran.load(), 100);
}

}  // namespace
}  // namespace rimwatch::daemon
