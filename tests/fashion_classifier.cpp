// spar_fashion_classifier: the open-dataset check of the whole stack. Trains a small
// convolutional classifier on Fashion-MNIST with spar's engine, layers and IDX reader, then
// reports test accuracy and exits 0 only when it reaches the --require bar.
//
// Yardstick (docs/references.md, Fashion-MNIST): the dataset README's contributed two-convolution
// networks reach 0.876 to 0.932 test accuracy; Xiao et al. 2017, Table 3, report 0.897 for an
// RBF support-vector classifier and 0.871 for a one-hidden-layer perceptron.
//
// Network: conv 1→32 3×3 pad 1, relu, average pool 2; conv 32→64 3×3 pad 1, relu, average
// pool 2 (optionally batch normalisation after each convolution); dense 3136→128, relu,
// dense 128→10. He-normal weights, mean softmax cross-entropy against one-hot rows, Adam.
// Pixels are scaled to [0, 1]. The training order is reshuffled every epoch from the seed.
//
// Exit status: 0 when accuracy >= --require, 1 when below it or training failed, 2 for bad
// usage or unreadable data.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

#include "engine/error.h"
#include "engine/optimizer.h"
#include "engine/parallel.h"
#include "engine/random.h"
#include "layers/activation.h"
#include "layers/convolution.h"
#include "layers/dense.h"
#include "layers/layer_stack.h"
#include "layers/normalisation.h"
#include "recipes/idx.h"

namespace {

using spar::Tensor;
using spar::Var;

constexpr int64_t kSide = 28;
constexpr int64_t kPixels = kSide * kSide;
constexpr int64_t kClasses = 10;
constexpr int64_t kEvaluationBatch = 500;

struct RunOptions {
  int64_t train = 60000;        // training images used, from the start of the training file
  int64_t test = 10000;         // test images used, from the start of the test file
  int epochs = 8;               // passes over the training images
  uint64_t seed = 1;            // run seed: initial weights and data order
  int threads = 0;              // kernel threads; 0 keeps spar's default
  double require = 0;           // accuracy bar for exit status 0
  double learning_rate = 1e-3;  // Adam step size
  int64_t batch = 64;           // images per step
  bool batch_norm = false;      // batch normalisation after each convolution
  int64_t report_every = 0;     // also print the running loss every this many steps (0: off)
  std::string data = "/usr/share/datasets/fashion-mnist";
};

void print_usage(std::FILE* to) {
  std::fprintf(to,
               "usage: spar_fashion_classifier [--train N] [--test M] [--epochs E] [--seed S]\n"
               "         [--threads T] [--require A] [--learning-rate R] [--batch B]\n"
               "         [--batch-norm] [--report-every K] [--data FOLDER]\n"
               "Trains a small convolutional classifier on Fashion-MNIST and prints its test\n"
               "accuracy; exits 0 only when the accuracy is at least A (default 0).\n"
               "Defaults: --train 60000 --test 10000 --epochs 8 --seed 1 --learning-rate 0.001\n"
               "          --batch 64 --data /usr/share/datasets/fashion-mnist\n");
}

[[noreturn]] void usage_error(const std::string& why) {
  std::fprintf(stderr, "spar_fashion_classifier: %s\n", why.c_str());
  print_usage(stderr);
  std::exit(2);
}

double number_of(const std::string& option, const char* text, double low, double high) {
  char* end = nullptr;
  const double v = std::strtod(text, &end);
  if (end == text || *end != '\0' || !std::isfinite(v) || v < low || v > high)
    usage_error(option + ": '" + text + "' is not a number in [" + std::to_string(low) + ", " +
                std::to_string(high) + "]");
  return v;
}

int64_t whole_number_of(const std::string& option, const char* text, int64_t low, int64_t high) {
  const double v = number_of(option, text, static_cast<double>(low), static_cast<double>(high));
  if (v != std::floor(v)) usage_error(option + ": '" + text + "' is not a whole number");
  return static_cast<int64_t>(v);
}

RunOptions parse(int argc, char** argv) {
  RunOptions o;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      print_usage(stdout);
      std::exit(0);
    }
    if (arg == "--batch-norm") {
      o.batch_norm = true;
      continue;
    }
    if (i + 1 >= argc) usage_error(arg + ": needs a value (or is unknown)");
    const char* value = argv[++i];
    if (arg == "--train")
      o.train = whole_number_of(arg, value, 1, 60000);
    else if (arg == "--test")
      o.test = whole_number_of(arg, value, 1, 10000);
    else if (arg == "--epochs")
      o.epochs = static_cast<int>(whole_number_of(arg, value, 1, 1000));
    else if (arg == "--seed")
      o.seed = static_cast<uint64_t>(whole_number_of(arg, value, 0, int64_t{1} << 52));
    else if (arg == "--threads")
      o.threads = static_cast<int>(whole_number_of(arg, value, 1, 256));
    else if (arg == "--require")
      o.require = number_of(arg, value, 0, 1);
    else if (arg == "--learning-rate")
      o.learning_rate = number_of(arg, value, 0, 1);
    else if (arg == "--batch")
      o.batch = whole_number_of(arg, value, 1, 60000);
    else if (arg == "--report-every")
      o.report_every = whole_number_of(arg, value, 0, 1000000);
    else if (arg == "--data")
      o.data = value;
    else
      usage_error("unknown option " + arg);
  }
  return o;
}

struct Split {
  Tensor<float> images;         // [count, 1, 28, 28], values in [0, 1]
  std::vector<int64_t> labels;  // 0..9
};

// The first `count` images and labels of one split, pixels divided by 255.
Split load_split(const std::string& folder, const std::string& stem, int64_t count) {
  const std::string image_path = folder + "/" + stem + "-images-idx3-ubyte.gz";
  const std::string label_path = folder + "/" + stem + "-labels-idx1-ubyte.gz";
  const spar::IdxTensor images = spar::read_idx(image_path);
  const spar::IdxIntegers labels = spar::read_idx_integers(label_path);
  if (images.extents.size() != 3 || images.extents[1] != kSide || images.extents[2] != kSide)
    spar::raise(spar::ErrorKind::kBadInputFile, image_path + ": expected [N, 28, 28] images");
  if (labels.extents.size() != 1 || labels.extents[0] != images.extents[0])
    spar::raise(spar::ErrorKind::kBadInputFile,
                label_path + ": expected one label per image of " + image_path);
  if (images.extents[0] < count)
    spar::raise(spar::ErrorKind::kBadInputFile,
                image_path + ": holds " + std::to_string(images.extents[0]) +
                    " images, fewer than the " + std::to_string(count) + " asked for");
  Split s;
  s.images = Tensor<float>::uninitialised({count, 1, kSide, kSide});
  const float* from = images.values.data();
  float* to = s.images.mutable_data();
  for (int64_t k = 0; k < count * kPixels; ++k) to[k] = from[k] / 255.0f;
  s.labels.assign(labels.values.begin(), labels.values.begin() + count);
  for (int64_t label : s.labels)
    if (label < 0 || label >= kClasses)
      spar::raise(spar::ErrorKind::kBadInputFile,
                  label_path + ": label " + std::to_string(label) + " outside 0..9");
  return s;
}

// Images order[first..first+n-1] as one batch [n, 1, 28, 28] and their labels.
Tensor<float> gather(const Split& split, const std::vector<int64_t>& order, int64_t first,
                     int64_t n, std::vector<int64_t>& labels) {
  Tensor<float> batch = Tensor<float>::uninitialised({n, 1, kSide, kSide});
  labels.resize(static_cast<size_t>(n));
  for (int64_t i = 0; i < n; ++i) {
    const int64_t k = order[static_cast<size_t>(first + i)];
    std::memcpy(batch.mutable_data() + i * kPixels, split.images.data() + k * kPixels,
                sizeof(float) * kPixels);
    labels[static_cast<size_t>(i)] = split.labels[static_cast<size_t>(k)];
  }
  return batch;
}

void build(spar::LayerStack<float>& model, const RunOptions& o, spar::Rng& rng) {
  spar::ConvOptions conv;
  conv.kernel_rows = conv.kernel_cols = 3;
  conv.geometry.pad_rows = conv.geometry.pad_cols = 1;
  conv.init = spar::Init::kHeNormal;
  conv.bias = !o.batch_norm;  // batch normalisation's shift takes the bias's place
  spar::DenseOptions dense;
  dense.init = spar::Init::kHeNormal;
  using spar::NonlinearityKind;

  model.emplace<spar::Convolution<float>>("conv1", 1, 32, conv, rng);
  if (o.batch_norm) model.emplace<spar::BatchNormalisation<float>>("norm1", 32);
  model.emplace<spar::Nonlinearity<float>>("relu1", NonlinearityKind::kRelu);
  model.emplace<spar::AveragePooling<float>>("pool1", 2);
  model.emplace<spar::Convolution<float>>("conv2", 32, 64, conv, rng);
  if (o.batch_norm) model.emplace<spar::BatchNormalisation<float>>("norm2", 64);
  model.emplace<spar::Nonlinearity<float>>("relu2", NonlinearityKind::kRelu);
  model.emplace<spar::AveragePooling<float>>("pool2", 2);
  model.emplace<spar::PerSampleReshape<float>>("flatten", spar::Shape{64 * 7 * 7});
  model.emplace<spar::Dense<float>>("dense1", 64 * 7 * 7, 128, dense, rng);
  model.emplace<spar::Nonlinearity<float>>("relu3", NonlinearityKind::kRelu);
  model.emplace<spar::Dense<float>>("dense2", 128, kClasses, dense, rng);
}

// Correctly classified images of `split`, with a no-record evaluation step.
int64_t count_correct(spar::LayerStack<float>& model, const Split& split) {
  spar::NoRecordScope no_record;
  const int64_t count = static_cast<int64_t>(split.labels.size());
  std::vector<int64_t> order(static_cast<size_t>(count));
  for (int64_t k = 0; k < count; ++k) order[static_cast<size_t>(k)] = k;
  std::vector<int64_t> labels;
  int64_t correct = 0;
  for (int64_t first = 0; first < count; first += kEvaluationBatch) {
    const int64_t n = std::min(kEvaluationBatch, count - first);
    spar::Context<float> ctx(nullptr, /*training=*/false);
    const Var<float> logits = model.run(Var<float>(gather(split, order, first, n, labels)), ctx);
    const float* z = logits.value().data();
    for (int64_t i = 0; i < n; ++i) {
      const float* row = z + i * kClasses;
      const int64_t guess = std::max_element(row, row + kClasses) - row;
      if (guess == labels[static_cast<size_t>(i)]) ++correct;
    }
  }
  return correct;
}

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

int run(const RunOptions& o) {
  if (o.threads > 0) spar::set_thread_count(o.threads);
  const auto start = std::chrono::steady_clock::now();
  const Split train = load_split(o.data, "train", o.train);
  const Split test = load_split(o.data, "t10k", o.test);
  std::printf("data: %lld training and %lld test images from %s (%.1f s)\n",
              static_cast<long long>(o.train), static_cast<long long>(o.test), o.data.c_str(),
              seconds_since(start));

  spar::Rng init_rng(o.seed, spar::derive_stream(o.seed, "initialisation"));
  spar::Rng order_rng(o.seed, spar::derive_stream(o.seed, "data order"));
  spar::LayerStack<float> model;
  build(model, o, init_rng);
  std::vector<spar::NamedTensor<float>> params = model.all_parameters();
  std::vector<Tensor<float>*> targets;
  int64_t weights = 0;
  for (const auto& p : params) {
    targets.push_back(p.tensor);
    weights += p.tensor->element_count();
  }
  std::printf(
      "model: %s\n%lld parameters; %d epochs, batch %lld, Adam learning rate %g, "
      "seed %llu, %d threads\n",
      model.describe().c_str(), static_cast<long long>(weights), o.epochs,
      static_cast<long long>(o.batch), o.learning_rate, static_cast<unsigned long long>(o.seed),
      spar::thread_count());
  spar::AdamOptions adam_options;
  adam_options.learning_rate = o.learning_rate;
  spar::Adam<float> adam(adam_options);

  spar::Tape<float> tape;
  std::vector<int64_t> order(static_cast<size_t>(o.train));
  std::vector<int64_t> labels;
  const auto training_start = std::chrono::steady_clock::now();
  for (int epoch = 1; epoch <= o.epochs; ++epoch) {
    // Fisher–Yates shuffle of the identity, drawn from the data-order stream.
    for (int64_t k = 0; k < o.train; ++k) order[static_cast<size_t>(k)] = k;
    for (int64_t k = o.train - 1; k > 0; --k)
      std::swap(order[static_cast<size_t>(k)],
                order[static_cast<size_t>(order_rng.below(static_cast<uint64_t>(k + 1)))]);

    const auto epoch_start = std::chrono::steady_clock::now();
    double loss_total = 0;
    int64_t seen = 0, steps = 0;
    for (int64_t first = 0; first < o.train; first += o.batch) {
      const int64_t n = std::min(o.batch, o.train - first);
      const Tensor<float> x = gather(train, order, first, n, labels);
      spar::Context<float> ctx(&tape, /*training=*/true);
      const Var<float> logits = model.run(Var<float>(x), ctx);
      const Var<float> target(spar::one_hot<float>(labels, kClasses));
      const Var<float> loss = spar::mean(spar::class_cross_entropy(logits, target, 1));
      const float value = loss.as_scalar();
      if (!std::isfinite(value)) {
        std::fprintf(stderr, "spar_fashion_classifier: loss is %g at epoch %d, step %lld\n",
                     static_cast<double>(value), epoch, static_cast<long long>(steps + 1));
        return 1;
      }
      const std::vector<Tensor<float>> grads = spar::parameter_gradients(loss, ctx, params);
      adam.step(targets, grads);
      tape.clear();
      loss_total += static_cast<double>(value) * static_cast<double>(n);
      seen += n;
      ++steps;
      if (o.report_every > 0 && steps % o.report_every == 0) {
        std::printf("  epoch %d step %lld: %lld images, %.0f images/s, running loss %.4f\n", epoch,
                    static_cast<long long>(steps), static_cast<long long>(seen),
                    static_cast<double>(seen) / seconds_since(epoch_start), loss_total / seen);
        std::fflush(stdout);
      }
    }
    const double epoch_seconds = seconds_since(epoch_start);
    std::printf("epoch %d/%d: %lld images in %.1f s, %.0f images/s, running loss %.4f\n", epoch,
                o.epochs, static_cast<long long>(seen), epoch_seconds,
                static_cast<double>(seen) / epoch_seconds, loss_total / seen);
    std::fflush(stdout);
  }
  const double training_seconds = seconds_since(training_start);

  const auto evaluation_start = std::chrono::steady_clock::now();
  const int64_t correct = count_correct(model, test);
  const double accuracy = static_cast<double>(correct) / static_cast<double>(o.test);
  std::printf("training %.1f s (%.0f images/s), evaluation %.1f s, total %.1f s\n",
              training_seconds, static_cast<double>(o.train) * o.epochs / training_seconds,
              seconds_since(evaluation_start), seconds_since(start));
  std::printf("test accuracy %.4f (%lld of %lld)\n", accuracy, static_cast<long long>(correct),
              static_cast<long long>(o.test));
  if (accuracy < o.require) {
    std::printf("below the required %.4f\n", o.require);
    return 1;
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  const RunOptions options = parse(argc, argv);
  try {
    return run(options);
  } catch (const spar::Error& e) {
    std::fprintf(stderr, "spar_fashion_classifier: %s\n", e.what());
    return e.kind() == spar::ErrorKind::kBadInputFile ? 2 : 1;
  }
}
