! fracconv.f90 -- Fortran 2008 interface to libfracconv (the public C API in
! csrc/fracconv.h) through iso_c_binding.
!
! Every procedure has a required intent(out) argument status: FC_OK (0) or
! one of the FC_ERR_* codes below; fc_error_message(status) gives the
! library's message. As in C, a refused call changes nothing.
!
! Array layouts match the C ones without copying:
!   - nsig signals of n samples: x(n, nsig) (each signal contiguous);
!   - a stream block of count time steps: x(channels, count) (channel
!     fastest).
! A stream is a type(fc_stream) holding the C pointer: create it with
! fc_stream_create, fc_stream_create_timed (a time per sample, pushed with
! fc_stream_push_timed) or fc_stream_load and release it with fc_stream_free
! (no finalizer: copies of the handle share the one C object). The solver
! (type(fc_solver)) and the controller (type(fc_controller)) are handles of
! the same kind.
!
! Solver callbacks are bind(c) procedures of the interfaces fc_rhs_proc and
! fc_jac_proc (module procedures or external ones): the module passes
! c_funloc of the procedure to the C library, with the optional user
! pointer (type(c_ptr), e.g. c_loc of a target variable) passed back on
! every call. A state y(m) of order > 1 components takes init(m, 2):
! init(:, 1) = y(t0), init(:, 2) = y'(t0).
!
! The controller moves machinery: validate it on the plant, keep actuator
! and rate limits in the hardware and an independent safe stop that does
! not depend on this software (csrc/fracconv.h).
module fracconv
  use, intrinsic :: iso_c_binding
  implicit none
  private

  integer, parameter, public :: FC_OK = 0, FC_ERR_NULL = 1, FC_ERR_RULE = 2, &
       FC_ERR_ORDER = 3, FC_ERR_STEP = 4, FC_ERR_SIZE = 5, FC_ERR_NONFINITE = 6, &
       FC_ERR_NOMEM = 7, FC_ERR_MODE = 8, FC_ERR_TOL = 9, FC_ERR_FORMAT = 10, &
       FC_ERR_BUSY = 11, FC_ERR_KERNEL = 12, FC_ERR_ARG = 13, FC_ERR_INDEX = 14, &
       FC_ERR_RANGE = 15, FC_ERR_HORIZON = 16, FC_ERR_IO = 17, FC_ERR_CALLBACK = 64, &
       FC_ERR_NEWTON = 65, FC_ERR_NORHS = 66
  integer, parameter, public :: FC_RULE_RECTANGLE = 0, FC_RULE_TRAPEZOID = 1, &
       FC_RULE_GRUNWALD = 2, FC_RULE_L1 = 3
  integer, parameter, public :: FC_ENGINE_AUTO = 0, FC_ENGINE_DIRECT = 1, &
       FC_ENGINE_BLOCKED = 2, FC_ENGINE_FFT = 3
  integer, parameter, public :: FC_MODE_EXACT = 0, FC_MODE_COMPRESSED = 1
  integer, parameter, public :: FC_METHOD_RECTANGLE = 0, FC_METHOD_PC = 1, &
       FC_METHOD_TRAPEZOID = 2, FC_METHOD_IMPLICIT_RECTANGLE = 3
  integer, parameter, public :: FC_AW_NONE = 0, FC_AW_CONDITIONAL = 1
  integer, parameter, public :: FC_CTRL_LIMITED = 1, FC_CTRL_PAST_HORIZON = 2, &
       FC_CTRL_MANUAL = 4

  type, public :: fc_stream
    type(c_ptr) :: p = c_null_ptr
  end type fc_stream

  public :: fc_version, fc_error_message, fc_weights, fc_apply, fc_lagged_sum
  public :: fc_stream_create, fc_stream_free, fc_stream_push, fc_stream_push_block
  public :: fc_stream_history, fc_stream_count, fc_stream_save, fc_stream_load
  public :: fc_stream_save_file, fc_stream_load_file
  public :: fc_grid_apply, fc_stream_create_timed, fc_stream_push_timed, fc_stream_is_timed
  public :: fc_stream_preview_timed
  public :: fc_solver_save_file, fc_solver_load_file
  public :: fc_controller_save_file, fc_controller_load_file

  type, public :: fc_solver
    type(c_ptr) :: p = c_null_ptr
  end type fc_solver

  type, public :: fc_controller
    type(c_ptr) :: p = c_null_ptr
  end type fc_controller

  ! fc_controller_params of fracconv.h, field for field (fill it with
  ! fc_controller_default_params first)
  type, bind(C), public :: fc_controller_params
    real(c_double) :: kp, ki, kd, integral_order, derivative_order, step
    integer(c_int) :: integral_rule, derivative_rule
    real(c_double) :: out_min, out_max, rate_limit, setpoint_weight_p, &
         setpoint_weight_d, filter_time
    integer(c_int) :: anti_windup, memory
    real(c_double) :: tol, horizon
  end type fc_controller_params

  abstract interface
    ! f(1:m) = f(t, y(1:m)); a non-zero result stops the run (FC_ERR_CALLBACK)
    integer(c_int) function fc_rhs_proc(t, y, f, user) bind(C)
      import :: c_int, c_double, c_ptr
      real(c_double), value :: t
      real(c_double), intent(in) :: y(*)
      real(c_double), intent(out) :: f(*)
      type(c_ptr), value :: user
    end function
    ! jac(i + (j-1)*m) = d f_j / d y_i (the C row-major J[j][i] seen from
    ! Fortran: jac(m, m) holds the transpose, jac(i, j) = d f_j / d y_i)
    integer(c_int) function fc_jac_proc(t, y, jac, user) bind(C)
      import :: c_int, c_double, c_ptr
      real(c_double), value :: t
      real(c_double), intent(in) :: y(*)
      real(c_double), intent(out) :: jac(*)
      type(c_ptr), value :: user
    end function
  end interface
  public :: fc_rhs_proc, fc_jac_proc

  public :: fc_solver_create, fc_solver_free, fc_solver_set_rhs, fc_solver_set_jacobian
  public :: fc_solver_set_newton, fc_solver_set_corrections, fc_solver_advance
  public :: fc_solver_time, fc_solver_state, fc_solver_steps, fc_solver_save, fc_solver_load
  public :: fc_controller_default_params, fc_controller_create, fc_controller_free
  public :: fc_controller_update, fc_controller_update_block, fc_controller_set_manual
  public :: fc_controller_set_auto, fc_controller_reset, fc_controller_status
  public :: fc_controller_terms, fc_controller_count, fc_controller_save, fc_controller_load

  interface fc_apply
    module procedure fc_apply_1, fc_apply_2
  end interface fc_apply

  interface fc_grid_apply
    module procedure fc_grid_apply_1, fc_grid_apply_2
  end interface fc_grid_apply

  interface fc_stream_push_timed
    module procedure fc_stream_push_timed_0, fc_stream_push_timed_1, fc_stream_push_timed_2
  end interface fc_stream_push_timed
  ! What fc_stream_push_timed of one time would return; nothing changes.
  interface fc_stream_preview_timed
    module procedure fc_stream_preview_timed_0, fc_stream_preview_timed_1
  end interface fc_stream_preview_timed

  interface
    integer(c_int) function c_version() bind(C, name="fc_version")
      import :: c_int
    end function
    type(c_ptr) function c_strerror(st) bind(C, name="fc_solver_strerror")
      import :: c_ptr, c_int
      integer(c_int), value :: st
    end function
    integer(c_int) function c_weights(rule, order, step, start, count, out) &
         bind(C, name="fc_weights")
      import :: c_int, c_double, c_int64_t, c_size_t
      integer(c_int), value :: rule
      real(c_double), value :: order, step
      integer(c_int64_t), value :: start
      integer(c_size_t), value :: count
      real(c_double), intent(out) :: out(*)
    end function
    integer(c_int) function c_apply(ctx, rule, order, step, x, nsig, n, engine, y) &
         bind(C, name="fc_apply")
      import :: c_int, c_double, c_size_t, c_ptr
      type(c_ptr), value :: ctx
      integer(c_int), value :: rule, engine
      real(c_double), value :: order, step
      real(c_double), intent(in) :: x(*)
      integer(c_size_t), value :: nsig, n
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_lagged_sum(ctx, x, nsig, n, kernel, klen, engine, y) &
         bind(C, name="fc_lagged_sum")
      import :: c_int, c_double, c_size_t, c_ptr
      type(c_ptr), value :: ctx
      real(c_double), intent(in) :: x(*), kernel(*)
      integer(c_size_t), value :: nsig, n, klen
      integer(c_int), value :: engine
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_create(rule, order, step, channels, mode, tol, &
         horizon, out) bind(C, name="fc_stream_create")
      import :: c_int, c_double, c_size_t, c_ptr
      integer(c_int), value :: rule, mode
      real(c_double), value :: order, step, tol, horizon
      integer(c_size_t), value :: channels
      type(c_ptr), intent(out) :: out
    end function
    subroutine c_stream_free(s) bind(C, name="fc_stream_free")
      import :: c_ptr
      type(c_ptr), value :: s
    end subroutine
    integer(c_int) function c_stream_push(s, x, y) bind(C, name="fc_stream_push")
      import :: c_int, c_double, c_ptr
      type(c_ptr), value :: s
      real(c_double), intent(in) :: x(*)
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_push_block(s, x, count, y) &
         bind(C, name="fc_stream_push_block")
      import :: c_int, c_double, c_ptr, c_size_t
      type(c_ptr), value :: s
      real(c_double), intent(in) :: x(*)
      integer(c_size_t), value :: count
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_stream_history(s, h) bind(C, name="fc_stream_history")
      import :: c_int, c_double, c_ptr
      type(c_ptr), value :: s
      real(c_double), intent(out) :: h(*)
    end function
    integer(c_int) function c_stream_channels(s, c) bind(C, name="fc_stream_channels")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: c
    end function
    integer(c_int) function c_stream_count(s, c) bind(C, name="fc_stream_count")
      import :: c_int, c_ptr, c_int64_t
      type(c_ptr), value :: s
      integer(c_int64_t), intent(out) :: c
    end function
    integer(c_int) function c_stream_save_size(s, size) bind(C, name="fc_stream_save_size")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: size
    end function
    integer(c_int) function c_stream_save(s, buf, size, written) bind(C, name="fc_stream_save")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      type(c_ptr), value :: s
      integer(c_signed_char), intent(out) :: buf(*)
      integer(c_size_t), value :: size
      integer(c_size_t), intent(out) :: written
    end function
    integer(c_int) function c_stream_load(buf, size, out) bind(C, name="fc_stream_load")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      integer(c_signed_char), intent(in) :: buf(*)
      integer(c_size_t), value :: size
      type(c_ptr), intent(out) :: out
    end function
    ! --- solver
    integer(c_int) function c_solver_create(m, orders, step, t0, init, method, memory, &
         tol, horizon, out) bind(C, name="fc_solver_create")
      import :: c_int, c_double, c_size_t, c_ptr
      integer(c_size_t), value :: m
      real(c_double), intent(in) :: orders(*), init(*)
      real(c_double), value :: step, t0, tol, horizon
      integer(c_int), value :: method, memory
      type(c_ptr), intent(out) :: out
    end function
    subroutine c_solver_free(s) bind(C, name="fc_solver_free")
      import :: c_ptr
      type(c_ptr), value :: s
    end subroutine
    integer(c_int) function c_solver_set_rhs(s, fn, user) bind(C, name="fc_solver_set_rhs")
      import :: c_int, c_ptr, c_funptr
      type(c_ptr), value :: s, user
      type(c_funptr), value :: fn
    end function
    integer(c_int) function c_solver_set_jacobian(s, fn, user) &
         bind(C, name="fc_solver_set_jacobian")
      import :: c_int, c_ptr, c_funptr
      type(c_ptr), value :: s, user
      type(c_funptr), value :: fn
    end function
    integer(c_int) function c_solver_set_newton(s, tol, maxiter) &
         bind(C, name="fc_solver_set_newton")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: s
      real(c_double), value :: tol
      integer(c_int), value :: maxiter
    end function
    integer(c_int) function c_solver_set_corrections(s, passes) &
         bind(C, name="fc_solver_set_corrections")
      import :: c_int, c_ptr
      type(c_ptr), value :: s
      integer(c_int), value :: passes
    end function
    integer(c_int) function c_solver_advance(s, nsteps, t_out, y_out, done) &
         bind(C, name="fc_solver_advance")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s, t_out, y_out
      integer(c_size_t), value :: nsteps
      integer(c_size_t), intent(out) :: done
    end function
    integer(c_int) function c_solver_time(s, t) bind(C, name="fc_solver_time")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: s
      real(c_double), intent(out) :: t
    end function
    integer(c_int) function c_solver_state(s, y) bind(C, name="fc_solver_state")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: s
      real(c_double), intent(out) :: y(*)
    end function
    integer(c_int) function c_solver_steps(s, n) bind(C, name="fc_solver_steps")
      import :: c_int, c_ptr, c_int64_t
      type(c_ptr), value :: s
      integer(c_int64_t), intent(out) :: n
    end function
    integer(c_int) function c_solver_dim(s, m) bind(C, name="fc_solver_dim")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: m
    end function
    integer(c_int) function c_solver_save_size(s, size) bind(C, name="fc_solver_save_size")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: s
      integer(c_size_t), intent(out) :: size
    end function
    integer(c_int) function c_solver_save(s, buf, size, written) bind(C, name="fc_solver_save")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      type(c_ptr), value :: s
      integer(c_signed_char), intent(out) :: buf(*)
      integer(c_size_t), value :: size
      integer(c_size_t), intent(out) :: written
    end function
    integer(c_int) function c_solver_load(buf, size, out) bind(C, name="fc_solver_load")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      integer(c_signed_char), intent(in) :: buf(*)
      integer(c_size_t), value :: size
      type(c_ptr), intent(out) :: out
    end function
    ! --- controller
    integer(c_int) function c_controller_default_params(p) &
         bind(C, name="fc_controller_default_params")
      import :: c_int, fc_controller_params
      type(fc_controller_params), intent(out) :: p
    end function
    integer(c_int) function c_controller_create(p, out) bind(C, name="fc_controller_create")
      import :: c_int, c_ptr, fc_controller_params
      type(fc_controller_params), intent(in) :: p
      type(c_ptr), intent(out) :: out
    end function
    subroutine c_controller_free(c) bind(C, name="fc_controller_free")
      import :: c_ptr
      type(c_ptr), value :: c
    end subroutine
    integer(c_int) function c_controller_update(c, r, y, u) bind(C, name="fc_controller_update")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: c
      real(c_double), value :: r, y
      real(c_double), intent(out) :: u
    end function
    integer(c_int) function c_controller_update_block(c, r, y, n, u, done) &
         bind(C, name="fc_controller_update_block")
      import :: c_int, c_ptr, c_double, c_size_t
      type(c_ptr), value :: c
      real(c_double), intent(in) :: r(*), y(*)
      integer(c_size_t), value :: n
      real(c_double), intent(out) :: u(*)
      integer(c_size_t), intent(out) :: done
    end function
    integer(c_int) function c_controller_set_manual(c, u) bind(C, name="fc_controller_set_manual")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: c
      real(c_double), value :: u
    end function
    integer(c_int) function c_controller_set_auto(c) bind(C, name="fc_controller_set_auto")
      import :: c_int, c_ptr
      type(c_ptr), value :: c
    end function
    integer(c_int) function c_controller_reset(c) bind(C, name="fc_controller_reset")
      import :: c_int, c_ptr
      type(c_ptr), value :: c
    end function
    integer(c_int) function c_controller_status(c, bits) bind(C, name="fc_controller_status")
      import :: c_int, c_ptr
      type(c_ptr), value :: c
      integer(c_int), intent(out) :: bits
    end function
    integer(c_int) function c_controller_terms(c, t) bind(C, name="fc_controller_terms")
      import :: c_int, c_ptr, c_double
      type(c_ptr), value :: c
      real(c_double), intent(out) :: t(6)
    end function
    integer(c_int) function c_controller_count(c, n) bind(C, name="fc_controller_count")
      import :: c_int, c_ptr, c_int64_t
      type(c_ptr), value :: c
      integer(c_int64_t), intent(out) :: n
    end function
    integer(c_int) function c_controller_save_size(c, size) &
         bind(C, name="fc_controller_save_size")
      import :: c_int, c_ptr, c_size_t
      type(c_ptr), value :: c
      integer(c_size_t), intent(out) :: size
    end function
    integer(c_int) function c_controller_save(c, buf, size, written) &
         bind(C, name="fc_controller_save")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      type(c_ptr), value :: c
      integer(c_signed_char), intent(out) :: buf(*)
      integer(c_size_t), value :: size
      integer(c_size_t), intent(out) :: written
    end function
    integer(c_int) function c_controller_load(buf, size, out) bind(C, name="fc_controller_load")
      import :: c_int, c_ptr, c_size_t, c_signed_char
      integer(c_signed_char), intent(in) :: buf(*)
      integer(c_size_t), value :: size
      type(c_ptr), intent(out) :: out
    end function
    integer(c_int) function c_stream_save_file(s, path) bind(C, name="fc_stream_save_file")
      import :: c_int, c_ptr, c_char
      type(c_ptr), value :: s
      character(kind=c_char), intent(in) :: path(*)
    end function
    integer(c_int) function c_solver_save_file(s, path) bind(C, name="fc_solver_save_file")
      import :: c_int, c_ptr, c_char
      type(c_ptr), value :: s
      character(kind=c_char), intent(in) :: path(*)
    end function
    integer(c_int) function c_solver_load_file(path, max_size, out) &
        bind(C, name="fc_solver_load_file")
      import :: c_int, c_ptr, c_size_t, c_char
      character(kind=c_char), intent(in) :: path(*)
      integer(c_size_t), value :: max_size
      type(c_ptr), intent(out) :: out
    end function
    integer(c_int) function c_controller_save_file(s, path) bind(C, name="fc_controller_save_file")
      import :: c_int, c_ptr, c_char
      type(c_ptr), value :: s
      character(kind=c_char), intent(in) :: path(*)
    end function
    integer(c_int) function c_controller_load_file(path, max_size, out) &
        bind(C, name="fc_controller_load_file")
      import :: c_int, c_ptr, c_size_t, c_char
      character(kind=c_char), intent(in) :: path(*)
      integer(c_size_t), value :: max_size
      type(c_ptr), intent(out) :: out
    end function
    integer(c_int) function c_stream_load_file(path, max_size, out) &
        bind(C, name="fc_stream_load_file")
      import :: c_int, c_ptr, c_size_t, c_char
      character(kind=c_char), intent(in) :: path(*)
      integer(c_size_t), value :: max_size
      type(c_ptr), intent(out) :: out
    end function
    ! --- grid of times and the timed stream
    integer(c_int) function c_grid_apply(rule, order, t, x, nsig, n, tol, y, terms) &
         bind(C, name="fc_grid_apply")
      import :: c_int, c_double, c_size_t
      integer(c_int), value :: rule
      real(c_double), value :: order, tol
      real(c_double), intent(in) :: t(*), x(*)
      integer(c_size_t), value :: nsig, n
      real(c_double), intent(inout) :: y(*)
      integer(c_size_t), intent(out) :: terms
    end function
    integer(c_int) function c_stream_create_timed(rule, order, min_step, channels, tol, &
         horizon, out) bind(C, name="fc_stream_create_timed")
      import :: c_int, c_double, c_size_t, c_ptr
      integer(c_int), value :: rule
      real(c_double), value :: order, min_step, tol, horizon
      integer(c_size_t), value :: channels
      type(c_ptr), intent(out) :: out
    end function
    integer(c_int) function c_stream_push_timed(s, t, x, count, y) &
         bind(C, name="fc_stream_push_timed")
      import :: c_int, c_double, c_ptr, c_size_t
      type(c_ptr), value :: s
      real(c_double), intent(in) :: t(*), x(*)
      integer(c_size_t), value :: count
      real(c_double), intent(inout) :: y(*)
    end function
    integer(c_int) function c_stream_preview_timed(s, t, x, y) &
         bind(C, name="fc_stream_preview_timed")
      import :: c_int, c_double, c_ptr
      type(c_ptr), value :: s
      real(c_double), value :: t
      real(c_double), intent(in) :: x(*)
      real(c_double), intent(inout) :: y(*)
    end function
    integer(c_int) function c_stream_is_timed(s, timed) bind(C, name="fc_stream_is_timed")
      import :: c_int, c_ptr
      type(c_ptr), value :: s
      integer(c_int), intent(out) :: timed
    end function
    integer(c_size_t) function c_strlen(s) bind(C, name="strlen")
      import :: c_size_t, c_ptr
      type(c_ptr), value :: s
    end function
  end interface

contains

  integer function fc_version()
    fc_version = int(c_version())
  end function fc_version

  ! The library's static message for a status code (fc_solver_strerror:
  ! fc_strerror's message for every code but the solver's own).
  function fc_error_message(status) result(msg)
    integer, intent(in) :: status
    character(len=:), allocatable :: msg
    type(c_ptr) :: p
    character(kind=c_char), pointer :: chars(:)
    integer :: i, n
    p = c_strerror(int(status, c_int))
    n = int(c_strlen(p))
    call c_f_pointer(p, chars, [n])
    allocate(character(len=n) :: msg)
    do i = 1, n
      msg(i:i) = chars(i)
    end do
  end function fc_error_message

  ! Weights of a rule for the indices start .. start+size(w)-1.
  subroutine fc_weights(rule, order, step, w, status, start)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(inout) :: w(:)
    integer, intent(out) :: status
    integer(c_int64_t), intent(in), optional :: start
    integer(c_int64_t) :: s0
    real(c_double) :: tmp(size(w))
    s0 = 0
    if (present(start)) s0 = start
    status = int(c_weights(int(rule, c_int), order, step, s0, size(w, kind=c_size_t), tmp))
    if (status == FC_OK) w = tmp
  end subroutine fc_weights

  ! One signal: y(i) approximates the operator at t = (i-1)*step.
  subroutine fc_apply_1(rule, order, step, x, y, status, engine)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (size(y) /= size(x)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_apply(c_null_ptr, int(rule, c_int), order, step, x, 1_c_size_t, &
         size(x, kind=c_size_t), e, y))
  end subroutine fc_apply_1

  ! nsig signals as the columns of x(n, nsig).
  subroutine fc_apply_2(rule, order, step, x, y, status, engine)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    real(c_double), intent(in), contiguous :: x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_apply(c_null_ptr, int(rule, c_int), order, step, x, &
         size(x, 2, kind=c_size_t), size(x, 1, kind=c_size_t), e, y))
  end subroutine fc_apply_2

  ! y(i) = sum_{k<=i} kernel(i-k+1) x(k).
  subroutine fc_lagged_sum(x, kernel, y, status, engine)
    real(c_double), intent(in), contiguous :: x(:), kernel(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer, intent(in), optional :: engine
    integer(c_int) :: e
    e = FC_ENGINE_AUTO
    if (present(engine)) e = int(engine, c_int)
    if (size(y) /= size(x)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_lagged_sum(c_null_ptr, x, 1_c_size_t, size(x, kind=c_size_t), kernel, &
         size(kernel, kind=c_size_t), e, y))
  end subroutine fc_lagged_sum

  ! A stream; mode FC_MODE_EXACT (default) or FC_MODE_COMPRESSED with tol
  ! and horizon. s is unchanged unless status == FC_OK.
  subroutine fc_stream_create(s, rule, order, step, status, channels, mode, tol, horizon)
    type(fc_stream), intent(inout) :: s
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, step
    integer, intent(out) :: status
    integer, intent(in), optional :: channels, mode
    real(c_double), intent(in), optional :: tol, horizon
    integer(c_size_t) :: c
    integer(c_int) :: m
    real(c_double) :: t, hz
    type(c_ptr) :: p
    c = 1; m = FC_MODE_EXACT; t = 0; hz = 0
    if (present(channels)) then
      if (channels < 1) then
        status = FC_ERR_SIZE
        return
      end if
      c = int(channels, c_size_t)
    end if
    if (present(mode)) m = int(mode, c_int)
    if (present(tol)) t = tol
    if (present(horizon)) hz = horizon
    status = int(c_stream_create(int(rule, c_int), order, step, c, m, t, hz, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_create

  subroutine fc_stream_free(s)
    type(fc_stream), intent(inout) :: s
    call c_stream_free(s%p)
    s%p = c_null_ptr
  end subroutine fc_stream_free

  integer function channels_of(s, status) result(c)
    type(fc_stream), intent(in) :: s
    integer, intent(out) :: status
    integer(c_size_t) :: cc
    cc = 0
    status = int(c_stream_channels(s%p, cc))
    c = int(cc)
  end function channels_of

  ! One time step: x(channels) in, y(channels) out.
  subroutine fc_stream_push(s, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x) /= c .or. size(y) /= c) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_push(s%p, x, y))
  end subroutine fc_stream_push

  ! size(x, 2) time steps of x(channels, count).
  subroutine fc_stream_push_block(s, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in), contiguous :: x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x, 1) /= c .or. any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_push_block(s%p, x, size(x, 2, kind=c_size_t), y))
  end subroutine fc_stream_push_block

  ! The history term of the next output, h(channels).
  subroutine fc_stream_history(s, h, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(inout), contiguous :: h(:)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(h) /= c) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_history(s%p, h))
  end subroutine fc_stream_history

  ! Samples pushed per channel.
  subroutine fc_stream_count(s, count, status)
    type(fc_stream), intent(in) :: s
    integer(c_int64_t), intent(out) :: count
    integer, intent(out) :: status
    count = 0
    status = int(c_stream_count(s%p, count))
  end subroutine fc_stream_count

  ! The saved state as bytes (allocated here).
  subroutine fc_stream_save(s, blob, status)
    type(fc_stream), intent(in) :: s
    integer(c_signed_char), allocatable, intent(inout) :: blob(:)
    integer, intent(out) :: status
    integer(c_size_t) :: size, written
    integer(c_signed_char), allocatable :: buf(:)
    status = int(c_stream_save_size(s%p, size))
    if (status /= FC_OK) return
    allocate(buf(max(size, 1_c_size_t)), stat=status)
    if (status /= 0) then
      status = FC_ERR_NOMEM
      return
    end if
    status = int(c_stream_save(s%p, buf, size, written))
    if (status == FC_OK) then
      if (allocated(blob)) deallocate(blob)
      allocate(blob(written))
      blob = buf(1:written)
    end if
  end subroutine fc_stream_save

  ! A new stream from saved bytes; s is unchanged unless status == FC_OK.
  subroutine fc_stream_load(s, blob, status)
    type(fc_stream), intent(inout) :: s
    integer(c_signed_char), intent(in), contiguous :: blob(:)
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_stream_load(blob, size(blob, kind=c_size_t), p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_load

  ! ----------------------------------------------------------- grid of times

  ! One signal on the times t (strictly increasing, finite): y(i)
  ! approximates the operator at t(i), from t(1), by sums of exponentials
  ! (fc_grid_apply: its rules, orders and promise as fracconv.h states
  ! them). tol in [1e-15, 1e-2], default 1e-12
  ! (as integral/derivative(..., t=) in Python); terms (optional) gets the
  ! number of exponential terms. A refusal writes nothing to y.
  subroutine fc_grid_apply_1(rule, order, t, x, y, status, tol, terms)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order
    real(c_double), intent(in), contiguous :: t(:), x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    real(c_double), intent(in), optional :: tol
    integer, intent(out), optional :: terms
    real(c_double) :: tl
    integer(c_size_t) :: k
    tl = 1e-12_c_double
    if (present(tol)) tl = tol
    if (size(x) /= size(t) .or. size(y) /= size(x)) then
      status = FC_ERR_ARG
      return
    end if
    k = 0
    status = int(c_grid_apply(int(rule, c_int), order, t, x, 1_c_size_t, &
         size(x, kind=c_size_t), tl, y, k))
    if (present(terms) .and. status == FC_OK) terms = int(k)
  end subroutine fc_grid_apply_1

  ! nsig signals as the columns of x(n, nsig), n = size(t).
  subroutine fc_grid_apply_2(rule, order, t, x, y, status, tol, terms)
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order
    real(c_double), intent(in), contiguous :: t(:), x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    real(c_double), intent(in), optional :: tol
    integer, intent(out), optional :: terms
    real(c_double) :: tl
    integer(c_size_t) :: k
    tl = 1e-12_c_double
    if (present(tol)) tl = tol
    if (size(x, 1) /= size(t) .or. size(x, 2) < 1 .or. any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    k = 0
    status = int(c_grid_apply(int(rule, c_int), order, t, x, size(x, 2, kind=c_size_t), &
         size(x, 1, kind=c_size_t), tl, y, k))
    if (present(terms) .and. status == FC_OK) terms = int(k)
  end subroutine fc_grid_apply_2

  ! A compressed stream with a time per sample (fc_stream_create_timed):
  ! min_step the smallest step a push may make, horizon the time span the
  ! promise covers, tol default 1e-10 (as pyfracconv.TimedStream). Pushes
  ! with fc_stream_push_timed; fc_stream_save / fc_stream_load /
  ! fc_stream_count / fc_stream_free work on it as on every stream. s is
  ! unchanged unless status == FC_OK.
  subroutine fc_stream_create_timed(s, rule, order, min_step, horizon, status, channels, tol)
    type(fc_stream), intent(inout) :: s
    integer, intent(in) :: rule
    real(c_double), intent(in) :: order, min_step, horizon
    integer, intent(out) :: status
    integer, intent(in), optional :: channels
    real(c_double), intent(in), optional :: tol
    integer(c_size_t) :: c
    real(c_double) :: tl
    type(c_ptr) :: p
    c = 1; tl = 1e-10_c_double
    if (present(channels)) then
      if (channels < 1) then
        status = FC_ERR_SIZE
        return
      end if
      c = int(channels, c_size_t)
    end if
    if (present(tol)) tl = tol
    status = int(c_stream_create_timed(int(rule, c_int), order, min_step, c, tl, horizon, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_create_timed

  ! One channel: the output y at time t for the sample x.
  subroutine fc_stream_push_timed_0(s, t, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in) :: t, x
    real(c_double), intent(inout) :: y
    integer, intent(out) :: status
    real(c_double) :: tt(1), xx(1), yy(1)
    if (channels_of(s, status) /= 1) then
      if (status == FC_OK) status = FC_ERR_ARG
      return
    end if
    tt(1) = t; xx(1) = x; yy(1) = 0
    status = int(c_stream_push_timed(s%p, tt, xx, 1_c_size_t, yy))
    if (status == FC_OK) y = yy(1)
  end subroutine fc_stream_push_timed_0

  ! One channel: what fc_stream_push_timed_0 would give; nothing changes.
  subroutine fc_stream_preview_timed_0(s, t, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in) :: t, x
    real(c_double), intent(inout) :: y
    integer, intent(out) :: status
    real(c_double) :: xx(1), yy(1)
    if (channels_of(s, status) /= 1) then
      if (status == FC_OK) status = FC_ERR_ARG
      return
    end if
    xx(1) = x; yy(1) = 0
    status = int(c_stream_preview_timed(s%p, t, xx, yy))
    if (status == FC_OK) y = yy(1)
  end subroutine fc_stream_preview_timed_0

  ! One time t: what fc_stream_push_timed_1 would give; nothing changes.
  subroutine fc_stream_preview_timed_1(s, t, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in) :: t
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x) /= c .or. size(y) /= c) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_preview_timed(s%p, t, x, y))
  end subroutine fc_stream_preview_timed_1

  ! One time t: x(channels) in, y(channels) out.
  subroutine fc_stream_push_timed_1(s, t, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in) :: t
    real(c_double), intent(in), contiguous :: x(:)
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    real(c_double) :: tt(1)
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x) /= c .or. size(y) /= c) then
      status = FC_ERR_ARG
      return
    end if
    tt(1) = t
    status = int(c_stream_push_timed(s%p, tt, x, 1_c_size_t, y))
  end subroutine fc_stream_push_timed_1

  ! size(t) times: x(channels, size(t)) in, y of the same shape out.
  subroutine fc_stream_push_timed_2(s, t, x, y, status)
    type(fc_stream), intent(in) :: s
    real(c_double), intent(in), contiguous :: t(:), x(:, :)
    real(c_double), intent(inout), contiguous :: y(:, :)
    integer, intent(out) :: status
    integer :: c
    c = channels_of(s, status)
    if (status /= FC_OK) return
    if (size(x, 1) /= c .or. size(x, 2) /= size(t) .or. any(shape(y) /= shape(x))) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_stream_push_timed(s%p, t, x, size(t, kind=c_size_t), y))
  end subroutine fc_stream_push_timed_2

  ! timed = .true. for a stream with a time per sample.
  subroutine fc_stream_is_timed(s, timed, status)
    type(fc_stream), intent(in) :: s
    logical, intent(out) :: timed
    integer, intent(out) :: status
    integer(c_int) :: v
    v = 0
    status = int(c_stream_is_timed(s%p, v))
    timed = v /= 0
  end subroutine fc_stream_is_timed

  ! ----------------------------------------------------------- solver

  ! A solver of D^a y = f(t, y) for m = size(orders) components; init(m, K),
  ! K = 1, or 2 when an order exceeds 1 (init(:, 2) = y'(t0)); method
  ! FC_METHOD_* (default FC_METHOD_PC), memory FC_MODE_EXACT (default) or
  ! FC_MODE_COMPRESSED with tol and horizon (steps). s is unchanged unless
  ! status == FC_OK.
  subroutine fc_solver_create(s, orders, step, t0, init, status, method, memory, tol, horizon)
    type(fc_solver), intent(inout) :: s
    real(c_double), intent(in), contiguous :: orders(:), init(:, :)
    real(c_double), intent(in) :: step, t0
    integer, intent(out) :: status
    integer, intent(in), optional :: method, memory
    real(c_double), intent(in), optional :: tol, horizon
    integer(c_int) :: me, mo
    real(c_double) :: t, hz
    type(c_ptr) :: p
    integer :: k
    me = FC_METHOD_PC; mo = FC_MODE_EXACT; t = 0; hz = 0
    if (present(method)) me = int(method, c_int)
    if (present(memory)) mo = int(memory, c_int)
    if (present(tol)) t = tol
    if (present(horizon)) hz = horizon
    if (size(orders) < 1) then
      status = FC_ERR_SIZE
      return
    end if
    k = 1
    if (any(orders > 1)) k = 2
    if (size(init, 1) /= size(orders) .or. size(init, 2) < k) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_solver_create(size(orders, kind=c_size_t), orders, step, t0, init, me, mo, &
         t, hz, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_solver_create

  subroutine fc_solver_free(s)
    type(fc_solver), intent(inout) :: s
    call c_solver_free(s%p)
    s%p = c_null_ptr
  end subroutine fc_solver_free

  ! The right-hand side: a bind(c) procedure of interface fc_rhs_proc;
  ! user (optional) is passed back to it on every call.
  subroutine fc_solver_set_rhs(s, fn, status, user)
    type(fc_solver), intent(in) :: s
    procedure(fc_rhs_proc) :: fn
    integer, intent(out) :: status
    type(c_ptr), intent(in), optional :: user
    type(c_ptr) :: u
    u = c_null_ptr
    if (present(user)) u = user
    status = int(c_solver_set_rhs(s%p, c_funloc(fn), u))
  end subroutine fc_solver_set_rhs

  ! The Jacobian of the implicit methods (fc_jac_proc).
  subroutine fc_solver_set_jacobian(s, fn, status, user)
    type(fc_solver), intent(in) :: s
    procedure(fc_jac_proc) :: fn
    integer, intent(out) :: status
    type(c_ptr), intent(in), optional :: user
    type(c_ptr) :: u
    u = c_null_ptr
    if (present(user)) u = user
    status = int(c_solver_set_jacobian(s%p, c_funloc(fn), u))
  end subroutine fc_solver_set_jacobian

  subroutine fc_solver_set_newton(s, tol, maxiter, status)
    type(fc_solver), intent(in) :: s
    real(c_double), intent(in) :: tol
    integer, intent(in) :: maxiter
    integer, intent(out) :: status
    if (maxiter < 1) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_solver_set_newton(s%p, tol, int(maxiter, c_int)))
  end subroutine fc_solver_set_newton

  subroutine fc_solver_set_corrections(s, passes, status)
    type(fc_solver), intent(in) :: s
    integer, intent(in) :: passes
    integer, intent(out) :: status
    if (passes < 1) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_solver_set_corrections(s%p, int(passes, c_int)))
  end subroutine fc_solver_set_corrections

  ! nsteps steps: t(nsteps) the times and y(m, nsteps) the states (both
  ! optional); done (optional) the steps completed. A stopped run
  ! (FC_ERR_CALLBACK, FC_ERR_NONFINITE, FC_ERR_NEWTON) keeps its completed
  ! steps, as in C.
  subroutine fc_solver_advance(s, nsteps, status, t, y, done)
    type(fc_solver), intent(in) :: s
    integer, intent(in) :: nsteps
    integer, intent(out) :: status
    real(c_double), intent(inout), contiguous, target, optional :: t(:), y(:, :)
    integer, intent(out), optional :: done
    integer(c_size_t) :: m, d
    type(c_ptr) :: pt, py
    d = 0
    if (present(done)) done = 0
    if (nsteps < 0) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_solver_dim(s%p, m))
    if (status /= FC_OK) return
    pt = c_null_ptr
    py = c_null_ptr
    if (present(t)) then
      if (size(t) < nsteps) then
        status = FC_ERR_ARG
        return
      end if
      if (nsteps > 0) pt = c_loc(t(1))
    end if
    if (present(y)) then
      if (size(y, 1) /= int(m) .or. size(y, 2) < nsteps) then
        status = FC_ERR_ARG
        return
      end if
      if (nsteps > 0) py = c_loc(y(1, 1))
    end if
    status = int(c_solver_advance(s%p, int(nsteps, c_size_t), pt, py, d))
    if (present(done)) done = int(d)
  end subroutine fc_solver_advance

  subroutine fc_solver_time(s, t, status)
    type(fc_solver), intent(in) :: s
    real(c_double), intent(out) :: t
    integer, intent(out) :: status
    t = 0
    status = int(c_solver_time(s%p, t))
  end subroutine fc_solver_time

  ! The current state y(m).
  subroutine fc_solver_state(s, y, status)
    type(fc_solver), intent(in) :: s
    real(c_double), intent(inout), contiguous :: y(:)
    integer, intent(out) :: status
    integer(c_size_t) :: m
    status = int(c_solver_dim(s%p, m))
    if (status /= FC_OK) return
    if (size(y) /= int(m)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_solver_state(s%p, y))
  end subroutine fc_solver_state

  subroutine fc_solver_steps(s, n, status)
    type(fc_solver), intent(in) :: s
    integer(c_int64_t), intent(out) :: n
    integer, intent(out) :: status
    n = 0
    status = int(c_solver_steps(s%p, n))
  end subroutine fc_solver_steps

  ! The saved state as bytes (allocated here); a loaded solver has no
  ! callbacks (set them again).
  subroutine fc_solver_save(s, blob, status)
    type(fc_solver), intent(in) :: s
    integer(c_signed_char), allocatable, intent(inout) :: blob(:)
    integer, intent(out) :: status
    integer(c_size_t) :: size, written
    integer(c_signed_char), allocatable :: buf(:)
    status = int(c_solver_save_size(s%p, size))
    if (status /= FC_OK) return
    allocate(buf(max(size, 1_c_size_t)), stat=status)
    if (status /= 0) then
      status = FC_ERR_NOMEM
      return
    end if
    status = int(c_solver_save(s%p, buf, size, written))
    if (status == FC_OK) then
      if (allocated(blob)) deallocate(blob)
      allocate(blob(written))
      blob = buf(1:written)
    end if
  end subroutine fc_solver_save

  subroutine fc_solver_load(s, blob, status)
    type(fc_solver), intent(inout) :: s
    integer(c_signed_char), intent(in), contiguous :: blob(:)
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_solver_load(blob, size(blob, kind=c_size_t), p))
    if (status == FC_OK) s%p = p
  end subroutine fc_solver_load

  ! ----------------------------------------------------------- controller

  ! The library's defaults (fc_controller_default_params).
  subroutine fc_controller_default_params(p, status)
    type(fc_controller_params), intent(out) :: p
    integer, intent(out) :: status
    status = int(c_controller_default_params(p))
  end subroutine fc_controller_default_params

  ! c is unchanged unless status == FC_OK.
  subroutine fc_controller_create(c, p, status)
    type(fc_controller), intent(inout) :: c
    type(fc_controller_params), intent(in) :: p
    integer, intent(out) :: status
    type(c_ptr) :: q
    status = int(c_controller_create(p, q))
    if (status == FC_OK) c%p = q
  end subroutine fc_controller_create

  subroutine fc_controller_free(c)
    type(fc_controller), intent(inout) :: c
    call c_controller_free(c%p)
    c%p = c_null_ptr
  end subroutine fc_controller_free

  ! One sample: setpoint r, measurement y, output u (unchanged on refusal).
  subroutine fc_controller_update(c, r, y, u, status)
    type(fc_controller), intent(in) :: c
    real(c_double), intent(in) :: r, y
    real(c_double), intent(inout) :: u
    integer, intent(out) :: status
    real(c_double) :: v
    v = 0
    status = int(c_controller_update(c%p, r, y, v))
    if (status == FC_OK) u = v
  end subroutine fc_controller_update

  ! size(r) samples; done (optional): the samples applied.
  subroutine fc_controller_update_block(c, r, y, u, status, done)
    type(fc_controller), intent(in) :: c
    real(c_double), intent(in), contiguous :: r(:), y(:)
    real(c_double), intent(inout), contiguous :: u(:)
    integer, intent(out) :: status
    integer, intent(out), optional :: done
    integer(c_size_t) :: d
    d = 0
    if (present(done)) done = 0
    if (size(y) /= size(r) .or. size(u) /= size(r)) then
      status = FC_ERR_ARG
      return
    end if
    status = int(c_controller_update_block(c%p, r, y, size(r, kind=c_size_t), u, d))
    if (present(done)) done = int(d)
  end subroutine fc_controller_update_block

  subroutine fc_controller_set_manual(c, u, status)
    type(fc_controller), intent(in) :: c
    real(c_double), intent(in) :: u
    integer, intent(out) :: status
    status = int(c_controller_set_manual(c%p, u))
  end subroutine fc_controller_set_manual

  subroutine fc_controller_set_auto(c, status)
    type(fc_controller), intent(in) :: c
    integer, intent(out) :: status
    status = int(c_controller_set_auto(c%p))
  end subroutine fc_controller_set_auto

  subroutine fc_controller_reset(c, status)
    type(fc_controller), intent(in) :: c
    integer, intent(out) :: status
    status = int(c_controller_reset(c%p))
  end subroutine fc_controller_reset

  ! bits: FC_CTRL_LIMITED, FC_CTRL_PAST_HORIZON, FC_CTRL_MANUAL (iand).
  subroutine fc_controller_status(c, bits, status)
    type(fc_controller), intent(in) :: c
    integer, intent(out) :: bits
    integer, intent(out) :: status
    integer(c_int) :: b
    b = 0
    status = int(c_controller_status(c%p, b))
    bits = int(b)
  end subroutine fc_controller_status

  ! The last update's P, I, filtered D, bias, unlimited sum, output.
  subroutine fc_controller_terms(c, t, status)
    type(fc_controller), intent(in) :: c
    real(c_double), intent(out) :: t(6)
    integer, intent(out) :: status
    t = 0
    status = int(c_controller_terms(c%p, t))
  end subroutine fc_controller_terms

  subroutine fc_controller_count(c, n, status)
    type(fc_controller), intent(in) :: c
    integer(c_int64_t), intent(out) :: n
    integer, intent(out) :: status
    n = 0
    status = int(c_controller_count(c%p, n))
  end subroutine fc_controller_count

  subroutine fc_controller_save(c, blob, status)
    type(fc_controller), intent(in) :: c
    integer(c_signed_char), allocatable, intent(inout) :: blob(:)
    integer, intent(out) :: status
    integer(c_size_t) :: size, written
    integer(c_signed_char), allocatable :: buf(:)
    status = int(c_controller_save_size(c%p, size))
    if (status /= FC_OK) return
    allocate(buf(max(size, 1_c_size_t)), stat=status)
    if (status /= 0) then
      status = FC_ERR_NOMEM
      return
    end if
    status = int(c_controller_save(c%p, buf, size, written))
    if (status == FC_OK) then
      if (allocated(blob)) deallocate(blob)
      allocate(blob(written))
      blob = buf(1:written)
    end if
  end subroutine fc_controller_save

  subroutine fc_controller_load(c, blob, status)
    type(fc_controller), intent(inout) :: c
    integer(c_signed_char), intent(in), contiguous :: blob(:)
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_controller_load(blob, size(blob, kind=c_size_t), p))
    if (status == FC_OK) c%p = p
  end subroutine fc_controller_load
  ! The saved state written to the file path atomically (temporary file
  ! in the same directory, fsync, rename, directory sync; fracconv.h,
  ! "Checkpoint files"). Trailing blanks of path are not part of the name.
  ! FC_ERR_IO: the file could not be written; the old file is unchanged.
  subroutine fc_stream_save_file(s, path, status)
    type(fc_stream), intent(in) :: s
    character(len=*), intent(in) :: path
    integer, intent(out) :: status
    status = int(c_stream_save_file(s%p, trim(path) // c_null_char))
  end subroutine fc_stream_save_file

  ! A new stream from a file of at most max_size bytes written by
  ! fc_stream_save_file (in any language); s is unchanged unless
  ! status == FC_OK.
  subroutine fc_stream_load_file(s, path, max_size, status)
    type(fc_stream), intent(inout) :: s
    character(len=*), intent(in) :: path
    integer(c_size_t), intent(in) :: max_size
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_stream_load_file(trim(path) // c_null_char, max_size, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_stream_load_file

  ! fc_solver_save: the state written to path atomically (fc_solver_save_file).
  subroutine fc_solver_save_file(s, path, status)
    type(fc_solver), intent(in) :: s
    character(len=*), intent(in) :: path
    integer, intent(out) :: status
    status = int(c_solver_save_file(s%p, trim(path) // c_null_char))
  end subroutine fc_solver_save_file

  ! A new solver from a file of at most max_size bytes written by
  ! fc_solver_save_file; s is unchanged unless status == FC_OK.
  subroutine fc_solver_load_file(s, path, max_size, status)
    type(fc_solver), intent(inout) :: s
    character(len=*), intent(in) :: path
    integer(c_size_t), intent(in) :: max_size
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_solver_load_file(trim(path) // c_null_char, max_size, p))
    if (status == FC_OK) s%p = p
  end subroutine fc_solver_load_file

  ! fc_controller_save: the state written to path atomically (fc_controller_save_file).
  subroutine fc_controller_save_file(c, path, status)
    type(fc_controller), intent(in) :: c
    character(len=*), intent(in) :: path
    integer, intent(out) :: status
    status = int(c_controller_save_file(c%p, trim(path) // c_null_char))
  end subroutine fc_controller_save_file

  ! A new controller from a file of at most max_size bytes written by
  ! fc_controller_save_file; c is unchanged unless status == FC_OK.
  subroutine fc_controller_load_file(c, path, max_size, status)
    type(fc_controller), intent(inout) :: c
    character(len=*), intent(in) :: path
    integer(c_size_t), intent(in) :: max_size
    integer, intent(out) :: status
    type(c_ptr) :: p
    status = int(c_controller_load_file(trim(path) // c_null_char, max_size, p))
    if (status == FC_OK) c%p = p
  end subroutine fc_controller_load_file

end module fracconv
