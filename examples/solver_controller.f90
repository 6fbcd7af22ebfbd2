! solver_controller.f90 -- the solver and the controller through the
! Fortran module (fortran/fracconv.f90). tests/test_fortran.py builds it
! with gfortran -std=f2008 -Wall -Wextra -Werror, runs it and checks what it
! prints:
!   relax TAG a=A t=T y=Y  D^a y = -lambda y, y(0) = 1, lambda = 1 passed
!                          through the user pointer: y = E_a(-t^a), the
!                          Mittag-Leffler function (exp(-t) for a = 1;
!                          Gorenflo, Kilbas, Mainardi and Rogosin,
!                          Mittag-Leffler Functions, Springer 2014), which
!                          the test sums with mpmath;
!   ctl N R Y U            the controller's inputs and outputs (17 digits):
!                          the test feeds the same inputs to
!                          pyfracconv.Controller and compares.
! Its own checks print FAIL lines (exit status 1): a callback's non-zero
! return stops the run with the completed steps kept, save/load continues
! bit for bit, bad arguments are refused.
module relax_rhs
  use, intrinsic :: iso_c_binding
  implicit none
contains
  integer(c_int) function relax(t, y, f, user) bind(C)
    real(c_double), value :: t
    real(c_double), intent(in) :: y(*)
    real(c_double), intent(out) :: f(*)
    type(c_ptr), value :: user
    real(c_double), pointer :: lambda
    call c_f_pointer(user, lambda)
    f(1) = -lambda * y(1) + 0 * t
    relax = 0
  end function relax

  integer(c_int) function relax_jac(t, y, jac, user) bind(C)
    real(c_double), value :: t
    real(c_double), intent(in) :: y(*)
    real(c_double), intent(out) :: jac(*)
    type(c_ptr), value :: user
    real(c_double), pointer :: lambda
    call c_f_pointer(user, lambda)
    jac(1) = -lambda + 0 * (t + y(1))
    relax_jac = 0
  end function relax_jac

  ! stops (non-zero) once t > 0.105
  integer(c_int) function stopper(t, y, f, user) bind(C)
    real(c_double), value :: t
    real(c_double), intent(in) :: y(*)
    real(c_double), intent(out) :: f(*)
    type(c_ptr), value :: user
    f(1) = -y(1)
    stopper = 0
    if (t > 0.105_c_double .or. c_associated(user)) stopper = 1
  end function stopper

  ! two components of orders 0.7 and 1.4
  integer(c_int) function pair(t, y, f, user) bind(C)
    real(c_double), value :: t
    real(c_double), intent(in) :: y(*)
    real(c_double), intent(out) :: f(*)
    type(c_ptr), value :: user
    f(1) = -y(1) + sin(t)
    f(2) = -0.5_c_double * y(2) + y(1)
    pair = 0
    if (c_associated(user)) pair = 1
  end function pair
end module relax_rhs

program solver_controller
  use, intrinsic :: iso_c_binding
  use fracconv
  use relax_rhs
  implicit none
  real(c_double), target :: lambda = 1
  integer :: failures = 0

  call run_relax(1.0_c_double, FC_METHOD_PC, FC_MODE_EXACT, 'pc')
  call run_relax(0.6_c_double, FC_METHOD_PC, FC_MODE_EXACT, 'pc')
  call run_relax(0.6_c_double, FC_METHOD_PC, FC_MODE_COMPRESSED, 'pc-compressed')
  call run_relax(0.6_c_double, FC_METHOD_TRAPEZOID, FC_MODE_EXACT, 'trapezoid')
  call callback_stop()
  call solver_save_load()
  call controller_run()
  if (failures == 0) then
    print '(a)', 'all solver and controller checks passed'
  else
    error stop 1
  end if

contains

  subroutine check(ok, what)
    logical, intent(in) :: ok
    character(len=*), intent(in) :: what
    if (.not. ok) then
      failures = failures + 1
      print '(a, a)', 'FAIL: ', what
    end if
  end subroutine check

  subroutine run_relax(a, method, memory, tag)
    real(c_double), intent(in) :: a
    integer, intent(in) :: method, memory
    character(len=*), intent(in) :: tag
    type(fc_solver) :: s
    real(c_double) :: t(512), y(1, 512), init(1, 1)
    integer :: st, done, j
    init = 1
    call fc_solver_create(s, [a], 1.0_c_double / 256, 0.0_c_double, init, st, &
         method=method, memory=memory, tol=1e-10_c_double, horizon=1e4_c_double)
    call check(st == FC_OK, 'fc_solver_create')
    call fc_solver_set_rhs(s, relax, st, c_loc(lambda))
    call check(st == FC_OK, 'fc_solver_set_rhs')
    call fc_solver_set_jacobian(s, relax_jac, st, c_loc(lambda))
    call check(st == FC_OK, 'fc_solver_set_jacobian')
    call fc_solver_advance(s, 512, st, t=t, y=y, done=done)
    call check(st == FC_OK .and. done == 512, 'fc_solver_advance 512 steps')
    do j = 128, 512, 128
      print '(a, a, a, es25.17e3, a, es25.17e3, a, es25.17e3)', 'relax ', tag, ' a=', a, &
           ' t=', t(j), ' y=', y(1, j)
    end do
    call fc_solver_free(s)
  end subroutine run_relax

  subroutine callback_stop()
    type(fc_solver) :: s
    real(c_double) :: init(1, 1)
    integer(c_int64_t) :: n
    integer :: st, done
    init = 1
    call fc_solver_create(s, [0.5_c_double], 0.01_c_double, 0.0_c_double, init, st)
    call fc_solver_advance(s, 5, st)
    call check(st == FC_ERR_NORHS, 'no right-hand side: FC_ERR_NORHS')
    call fc_solver_set_rhs(s, stopper, st)
    call fc_solver_advance(s, 100, st, done=done)
    call fc_solver_steps(s, n, st)
    call check(done == 10 .and. n == 10, 'a stopping callback keeps the steps before it')
    call fc_solver_advance(s, 1, st)
    call check(st == FC_ERR_CALLBACK, 'a non-zero return is FC_ERR_CALLBACK')
    print '(a, i0, a, a)', 'stopped: status ', st, ': ', fc_error_message(st)
    call fc_solver_free(s)
    call fc_solver_create(s, [2.5_c_double], 0.01_c_double, 0.0_c_double, &
         reshape([1.0_c_double, 0.0_c_double], [1, 2]), st)
    call check(st == FC_ERR_ORDER .and. .not. c_associated(s%p), 'order 2.5 refused')
  end subroutine callback_stop

  subroutine solver_save_load()
    type(fc_solver) :: a, b
    real(c_double) :: init(2, 2), ya(2, 30), yb(2, 30)
    integer(c_signed_char), allocatable :: blob(:)
    integer :: st
    init = reshape([1.0_c_double, 0.5_c_double, 0.0_c_double, 0.25_c_double], [2, 2])
    call fc_solver_create(a, [0.7_c_double, 1.4_c_double], 0.02_c_double, 0.0_c_double, init, st)
    call fc_solver_set_rhs(a, pair, st)
    call fc_solver_advance(a, 40, st)
    call fc_solver_save(a, blob, st)
    call check(st == FC_OK, 'fc_solver_save')
    call fc_solver_load(b, blob, st)
    call check(st == FC_OK, 'fc_solver_load')
    call fc_solver_set_rhs(b, pair, st)
    call fc_solver_advance(a, 30, st, y=ya)
    call fc_solver_advance(b, 30, st, y=yb)
    call check(all(ya == yb), 'solver save/load continues bit for bit')
    call fc_solver_advance(a, 30, st, y=ya(:, 1:10))
    call check(st == FC_ERR_ARG, 'a y buffer of too few steps: FC_ERR_ARG')
    call fc_solver_free(a)
    call fc_solver_free(b)
  end subroutine solver_save_load

  subroutine controller_run()
    type(fc_controller_params) :: p
    type(fc_controller) :: c, d
    integer(c_signed_char), allocatable :: blob(:)
    real(c_double) :: r, y, u, rr(0:599), yy(0:599), uu(0:599), ud(0:599)
    integer(c_int64_t) :: count
    integer :: n, st, bits
    call fc_controller_default_params(p, st)
    p%kp = 2; p%ki = 1.5_c_double; p%kd = 0.3_c_double
    p%integral_order = 0.7_c_double; p%derivative_order = 0.4_c_double
    p%step = 0.01_c_double
    p%out_min = -1; p%out_max = 1.2_c_double
    p%rate_limit = 40
    p%setpoint_weight_p = 0.8_c_double; p%setpoint_weight_d = 0
    p%filter_time = 0.05_c_double
    call fc_controller_create(c, p, st)
    call check(st == FC_OK, 'fc_controller_create')
    u = 0
    do n = 0, 599
      if (n < 10) then
        r = 0
      else if (n < 350) then
        r = 1
      else
        r = -0.5_c_double
      end if
      y = 0.4_c_double * sin(0.031_c_double * n) + 0.002_c_double * n
      if (n == 200) call fc_controller_set_manual(c, 0.25_c_double, st)
      if (n == 260) call fc_controller_set_auto(c, st)
      if (n == 400) call fc_controller_save(c, blob, st)
      call fc_controller_update(c, r, y, u, st)
      call check(st == FC_OK, 'fc_controller_update')
      if (n >= 400) then
        rr(n) = r; yy(n) = y; uu(n) = u
      end if
      print '(a, i0, 3(1x, es25.17e3))', 'ctl ', n, r, y, u
    end do
    call fc_controller_load(d, blob, st)
    call fc_controller_update_block(d, rr(400:), yy(400:), ud(400:), st)
    call check(st == FC_OK .and. all(ud(400:) == uu(400:)), 'controller save/load bit for bit')
    call fc_controller_count(c, count, st)
    call fc_controller_status(c, bits, st)
    call check(count == 600 .and. iand(bits, FC_CTRL_MANUAL) == 0, 'count and mode')
    call fc_controller_update(c, r, ieee_nan(), u, st)
    call check(st == FC_ERR_NONFINITE, 'NaN measurement refused')
    p%out_min = 2
    call fc_controller_free(d)
    call fc_controller_create(d, p, st)
    call check(st == FC_ERR_ARG .and. .not. c_associated(d%p), 'out_min > out_max refused')
    call fc_controller_free(c)
  end subroutine controller_run

  real(c_double) function ieee_nan()
    use, intrinsic :: ieee_arithmetic, only: ieee_value, ieee_quiet_nan
    ieee_nan = ieee_value(1.0_c_double, ieee_quiet_nan)
  end function ieee_nan
end program solver_controller
