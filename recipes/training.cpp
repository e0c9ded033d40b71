#include "recipes/training.h"

#include <cmath>
#include <cstdio>
#include <sstream>

#include "engine/error.h"
#include "engine/kernels.h"

namespace spar {
namespace {

std::vector<Tensor<float>*> tensors_of(const std::vector<NamedTensor<float>>& named) {
  std::vector<Tensor<float>*> out;
  for (const NamedTensor<float>& n : named) out.push_back(n.tensor);
  return out;
}

// The mean of the critic's outputs as StepReport gives them: D's probability σ(score) for the
// logistic objectives, the raw score for the others.
double mean_output(Objective objective, const Var<float>& scores) {
  const bool logistic = objective_info(objective).logistic;
  double sum = 0;
  const float* v = scores.value().data();
  for (int64_t i = 0; i < scores.element_count(); ++i)
    sum += logistic ? 1 / (1 + std::exp(-static_cast<double>(v[i]))) : v[i];
  return sum / static_cast<double>(scores.element_count());
}

// Numerical failure: the step, what went bad and its first bad value.
[[noreturn]] void non_finite(int64_t step, const std::string& what, double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%g", value);
  raise(ErrorKind::kNumericalFailure, "step " + std::to_string(step) + ": " + what + " is " + text);
}
void require_finite(int64_t step, const std::string& what, double value) {
  if (!std::isfinite(value)) non_finite(step, what, value);
}
// Each tensor of `tensors` (named by `names`, as "critic/down2/filters") must be finite;
// `role` says what they are ("the gradient of", "" for the parameters themselves).
void require_finite(int64_t step, const std::string& role,
                    const std::vector<NamedTensor<float>>& names,
                    const std::vector<Tensor<float>>& tensors) {
  for (size_t i = 0; i < tensors.size(); ++i) {
    const int64_t at = kernels::first_non_finite(tensors[i]);
    if (at >= 0)
      non_finite(step,
                 role + names[i].name + " " + tensors[i].shape().str() + " at element " +
                     std::to_string(at),
                 tensors[i].data()[at]);
  }
}
std::vector<Tensor<float>> values_of(const std::vector<NamedTensor<float>>& named) {
  std::vector<Tensor<float>> out;
  for (const NamedTensor<float>& n : named) out.push_back(*n.tensor);
  return out;
}

void save_rng(Archive& archive, const std::string& name, const Rng& rng) {
  archive.put_int(name + ".position", static_cast<int64_t>(rng.position()));
}
void load_rng(const Archive& archive, const std::string& name, Rng& rng) {
  rng.set_position(static_cast<uint64_t>(archive.integer(name + ".position")));
}

}  // namespace

TrainingRun::TrainingRun(GanPair pair, std::unique_ptr<DataSource> data,
                         const TrainingOptions& options)
    : pair_(std::move(pair)),
      data_(std::move(data)),
      options_(options),
      generator_adam_(options.generator_optimiser),
      critic_adam_(options.critic_optimiser),
      latent_rng_(options.seed, derive_stream(options.seed, "latent")),
      dropout_rng_(options.seed, derive_stream(options.seed, "dropout")),
      penalty_rng_(options.seed, derive_stream(options.seed, "penalty")),
      seed_(options.seed) {
  if (options.critic_steps < 1 || options.batch < 2)
    raise(ErrorKind::kBadArgument, "trainer: critic steps must be ≥ 1 and the batch ≥ 2");
  if (data_->classes() != pair_.classes)
    raise(ErrorKind::kBadArgument, "trainer: the data has " + std::to_string(data_->classes()) +
                                       " classes but the model is built for " +
                                       std::to_string(pair_.classes) +
                                       (pair_.classes == 0 ? " (an unconditional model)" : ""));
  if (data_->sample_shape() != pair_.sample_shape)
    raise(ErrorKind::kBadArgument, "trainer: the data's samples have shape " +
                                       data_->sample_shape().str() + " but the generator makes " +
                                       pair_.sample_shape.str());
  generator_params_ = pair_.generator->all_parameters("generator");
  critic_params_ = pair_.critic->all_parameters("critic");
  for (const NamedTensor<float>& p : generator_params_) average_.push_back(p.tensor->clone());
}

std::vector<int64_t> TrainingRun::draw_labels(int64_t n) {
  std::vector<int64_t> labels;
  for (int64_t i = 0; i < n && pair_.classes > 0; ++i)
    labels.push_back(static_cast<int64_t>(latent_rng_.below(static_cast<uint64_t>(pair_.classes))));
  return labels;
}

double TrainingRun::critic_step() {
  const int64_t n = options_.batch;
  const std::vector<int64_t> fake_labels = draw_labels(n);
  Tensor<float> fake;
  {
    NoRecordScope constant;  // the critic step does not train the generator
    Context<float> g(nullptr, true, &dropout_rng_);
    fake = run_generator(pair_, Var<float>(draw_latent(n, latent_rng_)), fake_labels, g).value();
  }
  const Batch real = data_->next_batch(n);
  tape_.clear();
  Context<float> ctx(&tape_, true, &dropout_rng_);
  const Var<float> real_scores = run_critic(pair_, Var<float>(real.samples), real.labels, ctx);
  const Var<float> fake_scores = run_critic(pair_, Var<float>(fake), fake_labels, ctx);
  const int64_t step = steps_ + 1;
  Var<float> loss =
      discriminator_loss(options_.objective, real_scores, fake_scores, options_.least_squares);
  require_finite(step, "the critic loss", loss.as_scalar());
  // The penalties differentiate the critic with respect to its input at fixed labels; the
  // interpolates of the gradient penalty keep the real samples' labels.
  const Critic<float> on_real_labels = [&](const Var<float>& x) {
    return run_critic(pair_, x, real.labels, ctx);
  };
  if (options_.gradient_penalty > 0) {
    const Var<float> penalty = gradient_penalty(on_real_labels, real.samples, fake, tape_,
                                                penalty_rng_, options_.gradient_penalty);
    require_finite(step, "the gradient penalty", penalty.as_scalar());
    loss = add(loss, penalty);
  }
  if (options_.r1 > 0) {
    const Var<float> penalty = r1_penalty(on_real_labels, real.samples, tape_, options_.r1);
    require_finite(step, "the R1 penalty", penalty.as_scalar());
    loss = add(loss, penalty);
  }
  const std::vector<Tensor<float>> gradients = parameter_gradients(loss, ctx, critic_params_);
  require_finite(step, "the gradient of ", critic_params_, gradients);
  critic_adam_.step(tensors_of(critic_params_), gradients);
  last_.real_score = mean_output(options_.objective, real_scores);
  last_.fake_score = mean_output(options_.objective, fake_scores);
  return static_cast<double>(loss.as_scalar());
}

StepReport TrainingRun::step() {
  for (int k = 0; k < options_.critic_steps; ++k) last_.critic_loss = critic_step();
  tape_.clear();
  Context<float> ctx(&tape_, true, &dropout_rng_);
  const std::vector<int64_t> labels = draw_labels(options_.batch);
  const Var<float> fake =
      run_generator(pair_, Var<float>(draw_latent(options_.batch, latent_rng_)), labels, ctx);
  // The critic judges as a constant function here: its parameters are not recorded, so the
  // backward pass computes gradients along the generated samples only, not for the critic's
  // weights, which this step does not train.
  Context<float> judge(nullptr, true, &dropout_rng_);
  const Var<float> loss = generator_loss(options_.objective, run_critic(pair_, fake, labels, judge),
                                         options_.least_squares);
  const int64_t step = steps_ + 1;
  const double value = loss.as_scalar();
  require_finite(step, "the generator loss", value);
  const std::vector<Tensor<float>> gradients = parameter_gradients(loss, ctx, generator_params_);
  require_finite(step, "the gradient of ", generator_params_, gradients);
  generator_adam_.step(tensors_of(generator_params_), gradients);
  tape_.clear();
  // Once per step, the weights themselves (an update can overflow from finite gradients).
  require_finite(step, "", generator_params_, values_of(generator_params_));
  require_finite(step, "", critic_params_, values_of(critic_params_));
  average_generator();
  ++steps_;
  last_.step = steps_;
  last_.generator_loss = value;
  return last_;
}

void TrainingRun::average_generator() {
  // Warm-up (common practice): early on the decay is (1 + t)/(10 + t) if that is smaller, so
  // the average forgets the random initial weights within tens of steps, not thousands.
  const double t = static_cast<double>(steps_);
  const double beta = std::min(options_.average_decay, (1 + t) / (10 + t));
  for (size_t i = 0; i < average_.size(); ++i)
    average_[i] = beta > 0
                      ? kernels::blend(average_[i], beta, *generator_params_[i].tensor, 1 - beta)
                      : *generator_params_[i].tensor;
}

void TrainingRun::swap_average() {
  for (size_t i = 0; i < average_.size(); ++i) std::swap(*generator_params_[i].tensor, average_[i]);
}

void TrainingRun::fit_statistics_to_average() {
  // The fit depends only on the averaged weights, which change only with a step: a picture
  // and a checkpoint at the same step share one fit.
  if (statistics_fitted_at_ == steps_) return;
  statistics_fitted_at_ = steps_;
  // 512 fixed latent vectors (and labels in turn): enough for per-channel means and
  // variances, a fraction of a training step's work.
  const int64_t n = 512;
  Rng rng(seed_, derive_stream(seed_, "statistics"));
  std::vector<int64_t> labels;
  for (int64_t i = 0; i < n && pair_.classes > 0; ++i) labels.push_back(i % pair_.classes);
  NoRecordScope fitting;
  Context<float> pass(nullptr, false);
  pass.set_statistics_pass(true);
  run_generator(pair_, Var<float>(draw_latent(n, rng)), labels, pass);
}

namespace {
// Format 1 named the mlp model's hidden layers "dense1", "dense2", ...; they are "hidden1",
// "hidden2", ... now (architectures.cpp). Other layer names did not change.
std::string layers_renamed_since_format_1(const std::string& name) {
  std::string out, part;
  std::stringstream parts(name);
  while (std::getline(parts, part, kNameSeparator)) {
    const bool numbered_dense = part.size() > 5 && part.rfind("dense", 0) == 0 &&
                                part.find_first_not_of("0123456789", 5) == std::string::npos;
    out += (out.empty() ? "" : std::string(1, kNameSeparator)) +
           (numbered_dense ? "hidden" + part.substr(5) : part);
  }
  return out;
}
}  // namespace

int64_t upgrade_run_records(Archive& a) {
  if (a.contains("run.format")) {
    const int64_t format = a.integer("run.format");
    if (format != kRunFormat)
      raise(ErrorKind::kCorruptCheckpoint, a.source() + ": run format " + std::to_string(format) +
                                               "; this spar reads formats 1 to " +
                                               std::to_string(kRunFormat) +
                                               " (written by a newer spar?)");
    return format;
  }
  for (const std::string& name : a.names()) {
    const auto starts = [&](const char* prefix) { return name.rfind(prefix, 0) == 0; };
    const bool tensor =
        a.kind(name) == RecordKind::kFloat32Tensor || a.kind(name) == RecordKind::kFloat64Tensor;
    std::string now = name;
    if (starts("optimiser.generator/") || starts("optimiser.critic/"))
      now[std::string("optimiser").size()] = kNameSeparator;
    else if (tensor && starts("average.generator."))
      now = join_name("average", name_in_format_1(name.substr(8), a.tensor_shape(name)));
    else if (tensor && (starts("generator.") || starts("critic.")))
      now = name_in_format_1(name, a.tensor_shape(name));
    if (tensor && now != name) now = layers_renamed_since_format_1(now);
    if (now == name) continue;
    if (a.contains(now))
      raise(ErrorKind::kCorruptCheckpoint, a.source() + ": records '" + name + "' and '" + now +
                                               "' are one tensor under its old and new name");
    a.rename(name, now);
  }
  return 1;
}

void TrainingRun::save_generator(Archive& archive) {
  archive.put_int("run.format", kRunFormat);
  swap_average();
  fit_statistics_to_average();
  pair_.generator->save(archive, "generator");
  swap_average();
}

Tensor<float> TrainingRun::generate(const Tensor<float>& z, const std::vector<int64_t>& labels) {
  swap_average();
  fit_statistics_to_average();
  Tensor<float> out;
  {
    NoRecordScope sampling;
    Context<float> eval(nullptr, false);
    out = run_generator(pair_, Var<float>(z), labels, eval).value();
  }
  swap_average();
  return out;
}

void TrainingRun::save(Archive& archive) {
  archive.put_int("run.format", kRunFormat);
  pair_.generator->save(archive, "generator");
  pair_.critic->save(archive, "critic");
  for (size_t i = 0; i < average_.size(); ++i)
    archive.put(join_name("average", generator_params_[i].name), average_[i]);
  generator_adam_.save(archive, join_name("optimiser", "generator"));
  critic_adam_.save(archive, join_name("optimiser", "critic"));
  save_rng(archive, "stream.latent", latent_rng_);
  save_rng(archive, "stream.dropout", dropout_rng_);
  save_rng(archive, "stream.penalty", penalty_rng_);
  data_->save(archive, "data");
  archive.put_int("step", steps_);
}

void TrainingRun::load(const Archive& archive) {
  pair_.generator->load(archive, "generator");
  pair_.critic->load(archive, "critic");
  for (size_t i = 0; i < average_.size(); ++i)
    average_[i] = archive.tensor<float>(join_name("average", generator_params_[i].name));
  generator_adam_.load(archive, join_name("optimiser", "generator"));
  critic_adam_.load(archive, join_name("optimiser", "critic"));
  // The recipe's rates hold (equal to the saved ones unless a resume changed them on purpose).
  generator_adam_.set_learning_rate(options_.generator_optimiser.learning_rate);
  critic_adam_.set_learning_rate(options_.critic_optimiser.learning_rate);
  load_rng(archive, "stream.latent", latent_rng_);
  load_rng(archive, "stream.dropout", dropout_rng_);
  load_rng(archive, "stream.penalty", penalty_rng_);
  data_->load(archive, "data");
  steps_ = archive.integer("step");
  statistics_fitted_at_ = -1;  // the loaded statistics are the saved ones, not a fit
}

}  // namespace spar
